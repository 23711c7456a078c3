# cython: language_level=3
# INCONS of the compiled search kernels: closed states reached again more
# cheaply under deferred reopening (ARA*), waiting for the next merge into open.
#
# Kept in first-insertion order, like the dict of the pure-Python core: adding
# a member again keeps its place; removing it and adding it later puts it last.
# pos[node] is the node's index in items, or -1; the owner sizes pos together
# with its node tables. Removals leave holes, swept when the array is full.

from libc.stdint cimport int64_t
from libc.stdlib cimport realloc


cdef struct Incons:
    int64_t* items
    int64_t* pos
    int64_t len
    int64_t cap
    int64_t live


cdef inline bint incons_has(Incons* q, int64_t node) noexcept nogil:
    return q.pos != NULL and q.pos[node] >= 0


cdef inline bint incons_at(Incons* q, int64_t j, int64_t* node) noexcept nogil:
    # True when index j holds a member (not a hole); the member goes to node[0].
    node[0] = q.items[j]
    return q.pos[node[0]] == j


cdef inline int incons_add(Incons* q, int64_t node) noexcept nogil:
    # Add ``node`` unless it is a member already; return -1 when memory runs out.
    cdef int64_t j, k, s
    cdef int64_t* p
    if q.pos[node] >= 0:
        return 0
    if q.len >= q.cap and q.len > 2 * q.live + 1024:
        k = 0
        for j in range(q.len):
            if incons_at(q, j, &s):
                q.items[k] = s
                q.pos[s] = k
                k += 1
        q.len = k
    if q.len >= q.cap:
        k = q.cap * 2 if q.cap > 0 else 1024
        p = <int64_t*>realloc(q.items, k * sizeof(int64_t))
        if p == NULL:
            return -1
        q.items = p
        q.cap = k
    q.pos[node] = q.len
    q.items[q.len] = node
    q.len += 1
    q.live += 1
    return 0


cdef inline void incons_remove(Incons* q, int64_t node) noexcept nogil:
    q.pos[node] = -1
    q.live -= 1


cdef inline void incons_clear(Incons* q) noexcept nogil:
    # Forget every member; the caller has already gone through them in order.
    cdef int64_t j, s
    for j in range(q.len):
        if incons_at(q, j, &s):
            q.pos[s] = -1
    q.len = 0
    q.live = 0
