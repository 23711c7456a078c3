# cython: language_level=3, boundscheck=False, wraparound=False, cdivision=True, initializedcheck=False
"""Hold the memory of a compiled search: node tables, heaps, INCONS and the successor buffer.

Node tables are flat arrays indexed by node number (g, h, parent, closed flag
and, under deferred reopening, the INCONS position), grown by doubling; a
grid kernel sizes them once, one node per cell. The domain hooks here are
placeholders that a domain kernel overrides.
"""

from libc.math cimport INFINITY
from libc.stdint cimport int32_t, int64_t
from libc.stdlib cimport free, realloc

from worker.engine.kernels._heap cimport FItem, OpenItem


cdef inline int resize(void** block, size_t size) noexcept nogil:
    cdef void* p = realloc(block[0], size)
    if p == NULL:
        return -1
    block[0] = p
    return 0


cdef class SearchTables:
    """The arrays one search works in; ``SearchKernel`` runs the search over them."""

    def __cinit__(self, *args, **kwargs):
        self.g = NULL
        self.h = NULL
        self.parent = NULL
        self.closed = NULL
        self.incons.pos = NULL
        self.incons.items = NULL
        self.open.items = NULL
        self.fheap.items = NULL
        self.nodes_cap = 0

    def __dealloc__(self):
        free(self.g)
        free(self.h)
        free(self.parent)
        free(self.closed)
        free(self.incons.pos)
        free(self.incons.items)
        free(self.open.items)
        free(self.fheap.items)

    # -- what a domain kernel supplies ---------------------------------------

    cdef int _expand(self, int64_t node) noexcept nogil:
        return 0

    cdef double _heur(self, int i) noexcept nogil:
        return self.sh[i]

    cdef int64_t _store(self, int i) noexcept nogil:
        return <int64_t>self.skey[i]

    cdef object _node_state(self, int64_t node):
        return int(node)

    cdef object _succ_state(self, int i):
        return int(self.skey[i])

    # -- set-up ----------------------------------------------------------------

    cdef int _grow_nodes(self, int64_t need) noexcept nogil:
        """Make the node tables hold ``need`` nodes (new ones unseen); return -1 on no memory."""
        cdef int64_t cap = self.nodes_cap * 2 if self.nodes_cap > 0 else need
        cdef int64_t i
        if need <= self.nodes_cap:
            return 0
        if cap < 1:
            cap = 1
        while cap < need:
            cap *= 2
        if (resize(<void**>&self.g, cap * sizeof(double)) < 0
                or resize(<void**>&self.h, cap * sizeof(double)) < 0
                or resize(<void**>&self.parent, cap * sizeof(int32_t)) < 0
                or resize(<void**>&self.closed, cap * sizeof(unsigned char)) < 0
                or (self.defer and resize(<void**>&self.incons.pos, cap * sizeof(int64_t)) < 0)):
            return -1
        for i in range(self.nodes_cap, cap):
            self.g[i] = INFINITY
            self.h[i] = INFINITY
            self.parent[i] = -1
            self.closed[i] = 0
            if self.defer:
                self.incons.pos[i] = -1
        self.nodes_cap = cap
        return 0

    def memory_bytes(self):
        """Return the bytes held by the node tables, heaps and INCONS list."""
        cdef int64_t per_node = 2 * sizeof(double) + sizeof(int32_t) + sizeof(unsigned char)
        if self.defer:
            per_node += sizeof(int64_t)
        return (self.nodes_cap * per_node + self.open.cap * sizeof(OpenItem)
                + self.fheap.cap * sizeof(FItem) + self.incons.cap * sizeof(int64_t))

