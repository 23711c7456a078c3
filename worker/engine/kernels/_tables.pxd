# cython: language_level=3
# The memory of a compiled search: node tables, open list, f-heap, INCONS and
# the successor buffer, with the hooks a domain kernel fills in.
#
# A domain kernel (through SearchKernel) supplies three nogil methods: _expand
# fills the successor buffer (key, node or -1 when never stored, cost, goal
# flag, and h when it comes for free), _heur returns h of a buffered
# successor, and _store gives a buffered successor a node number; and two
# methods that turn a node or a buffered successor into the domain's own state.

from libc.stdint cimport int32_t, int64_t, uint64_t

from worker.engine.kernels._heap cimport FHeap, OpenHeap
from worker.engine.kernels._incons cimport Incons

cdef enum:
    MAX_SUCC = 8


cdef class SearchTables:
    cdef bint defer  # deferred reopening: INCONS needs a position per node

    # node tables, indexed by node number
    cdef double* g
    cdef double* h
    cdef int32_t* parent
    cdef unsigned char* closed
    cdef int64_t nodes_cap

    cdef OpenHeap open
    cdef FHeap fheap
    cdef Incons incons

    # the successors of the node being expanded
    cdef int nsucc
    cdef uint64_t skey[MAX_SUCC]
    cdef int64_t snode[MAX_SUCC]
    cdef double scost[MAX_SUCC]
    cdef double sh[MAX_SUCC]
    cdef unsigned char sgoal[MAX_SUCC]

    cdef int _expand(self, int64_t node) noexcept nogil
    cdef double _heur(self, int i) noexcept nogil
    cdef int64_t _store(self, int i) noexcept nogil
    cdef object _node_state(self, int64_t node)
    cdef object _succ_state(self, int i)
    cdef int _grow_nodes(self, int64_t need) noexcept nogil
