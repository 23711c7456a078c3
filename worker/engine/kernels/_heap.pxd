# cython: language_level=3
# Four-ary heaps of plain C records for the compiled search kernels.
#
# Two orders, both total (the push counter is unique), so the sequence of pops
# depends only on what was pushed, never on how the heap arranges it; that is
# what lets a compiled core pop exactly what the pure-Python ``heapq`` pops.
#
# - the open list: (key, -g, counter), i.e. least g + w*h, ties to larger g,
#   then to the earlier push;
# - the f-heap of the lower bound: (f, counter).
#
# Four children per node: half the levels of a binary heap, and the children
# sit next to each other in memory, which is what counts on heaps of millions.

from libc.stdint cimport int64_t
from libc.stdlib cimport realloc


cdef struct OpenItem:
    double key
    double g
    int64_t counter
    int64_t node


cdef struct FItem:
    double f
    double g
    int64_t counter
    int64_t node


cdef struct OpenHeap:
    OpenItem* items
    Py_ssize_t size
    Py_ssize_t cap


cdef struct FHeap:
    FItem* items
    Py_ssize_t size
    Py_ssize_t cap


cdef inline bint open_less(OpenItem* a, OpenItem* b) noexcept nogil:
    if a.key != b.key:
        return a.key < b.key
    if a.g != b.g:
        return a.g > b.g
    return a.counter < b.counter


cdef inline bint f_less(FItem* a, FItem* b) noexcept nogil:
    if a.f != b.f:
        return a.f < b.f
    return a.counter < b.counter


cdef inline int open_reserve(OpenHeap* h, Py_ssize_t need) noexcept nogil:
    # Grow the array to hold ``need`` items; return -1 when memory runs out.
    cdef Py_ssize_t cap = h.cap if h.cap > 0 else 1024
    cdef OpenItem* p
    if need <= h.cap:
        return 0
    while cap < need:
        cap *= 2
    p = <OpenItem*>realloc(h.items, cap * sizeof(OpenItem))
    if p == NULL:
        return -1
    h.items = p
    h.cap = cap
    return 0


cdef inline int f_reserve(FHeap* h, Py_ssize_t need) noexcept nogil:
    # Grow the array to hold ``need`` items; return -1 when memory runs out.
    cdef Py_ssize_t cap = h.cap if h.cap > 0 else 1024
    cdef FItem* p
    if need <= h.cap:
        return 0
    while cap < need:
        cap *= 2
    p = <FItem*>realloc(h.items, cap * sizeof(FItem))
    if p == NULL:
        return -1
    h.items = p
    h.cap = cap
    return 0


cdef inline void open_sift_up(OpenHeap* h, Py_ssize_t i) noexcept nogil:
    cdef OpenItem item = h.items[i]
    cdef Py_ssize_t parent
    while i > 0:
        parent = (i - 1) >> 2
        if not open_less(&item, &h.items[parent]):
            break
        h.items[i] = h.items[parent]
        i = parent
    h.items[i] = item


cdef inline void open_sift_down(OpenHeap* h, Py_ssize_t i) noexcept nogil:
    cdef OpenItem item = h.items[i]
    cdef Py_ssize_t n = h.size
    cdef Py_ssize_t child, best, last
    while True:
        child = 4 * i + 1
        if child >= n:
            break
        best = child
        last = child + 4 if child + 4 <= n else n
        child += 1
        while child < last:
            if open_less(&h.items[child], &h.items[best]):
                best = child
            child += 1
        if not open_less(&h.items[best], &item):
            break
        h.items[i] = h.items[best]
        i = best
    h.items[i] = item


cdef inline int open_push(OpenHeap* h, double key, double g, int64_t counter, int64_t node) noexcept nogil:
    if h.size >= h.cap and open_reserve(h, h.size + 1) < 0:
        return -1
    h.items[h.size].key = key
    h.items[h.size].g = g
    h.items[h.size].counter = counter
    h.items[h.size].node = node
    h.size += 1
    open_sift_up(h, h.size - 1)
    return 0


cdef inline OpenItem open_pop(OpenHeap* h) noexcept nogil:
    # Remove and return the least item; the caller checks that the heap is not empty.
    cdef OpenItem top = h.items[0]
    h.size -= 1
    if h.size > 0:
        h.items[0] = h.items[h.size]
        open_sift_down(h, 0)
    return top


cdef inline void open_heapify(OpenHeap* h) noexcept nogil:
    cdef Py_ssize_t i = (h.size - 2) >> 2 if h.size > 1 else -1
    while i >= 0:
        open_sift_down(h, i)
        i -= 1


cdef inline void f_sift_up(FHeap* h, Py_ssize_t i) noexcept nogil:
    cdef FItem item = h.items[i]
    cdef Py_ssize_t parent
    while i > 0:
        parent = (i - 1) >> 2
        if not f_less(&item, &h.items[parent]):
            break
        h.items[i] = h.items[parent]
        i = parent
    h.items[i] = item


cdef inline void f_sift_down(FHeap* h, Py_ssize_t i) noexcept nogil:
    cdef FItem item = h.items[i]
    cdef Py_ssize_t n = h.size
    cdef Py_ssize_t child, best, last
    while True:
        child = 4 * i + 1
        if child >= n:
            break
        best = child
        last = child + 4 if child + 4 <= n else n
        child += 1
        while child < last:
            if f_less(&h.items[child], &h.items[best]):
                best = child
            child += 1
        if not f_less(&h.items[best], &item):
            break
        h.items[i] = h.items[best]
        i = best
    h.items[i] = item


cdef inline int f_push(FHeap* h, double f, double g, int64_t counter, int64_t node) noexcept nogil:
    if h.size >= h.cap and f_reserve(h, h.size + 1) < 0:
        return -1
    h.items[h.size].f = f
    h.items[h.size].g = g
    h.items[h.size].counter = counter
    h.items[h.size].node = node
    h.size += 1
    f_sift_up(h, h.size - 1)
    return 0


cdef inline FItem f_pop(FHeap* h) noexcept nogil:
    # Remove and return the least item; the caller checks that the heap is not empty.
    cdef FItem top = h.items[0]
    h.size -= 1
    if h.size > 0:
        h.items[0] = h.items[h.size]
        f_sift_down(h, 0)
    return top


cdef inline void f_heapify(FHeap* h) noexcept nogil:
    cdef Py_ssize_t i = (h.size - 2) >> 2 if h.size > 1 else -1
    while i >= 0:
        f_sift_down(h, i)
        i -= 1
