# cython: language_level=3
# The compiled anytime weighted A* core shared by every kernel.
#
# A domain kernel subclasses SearchKernel and supplies three nogil methods:
# _expand fills the successor buffer (key, node or -1 when never stored, cost,
# goal flag, and h when it comes for free), _heur returns h of a buffered
# successor, and _store gives a buffered successor a node number; and two
# methods that turn a node or a buffered successor into the domain's own state.

from libc.stdint cimport int32_t, int64_t, uint64_t

from worker.engine.kernels._heap cimport FHeap, FItem, OpenHeap

cdef enum:
    MAX_SUCC = 8


cdef class SearchKernel:
    cdef public int64_t expansions
    cdef public int64_t generated
    cdef public int64_t reopened
    cdef public int64_t stored
    cdef public double incumbent
    cdef public double weight
    cdef readonly object space
    cdef readonly object config

    cdef double tol
    cdef double keep
    cdef double cutoff
    cdef double weight_step
    cdef bint defer
    cdef bint decreasing
    cdef bint done
    cdef bint pending
    cdef bint has_fheap
    cdef int64_t share_every
    cdef int64_t ticks
    cdef int64_t counter
    cdef int64_t start_node
    cdef object path
    cdef readonly object start_state

    # node tables, indexed by node number
    cdef double* g
    cdef double* h
    cdef int32_t* parent
    cdef unsigned char* closed
    cdef int64_t* incons_pos
    cdef int64_t nodes_cap

    cdef OpenHeap open
    cdef FHeap fheap
    cdef Py_ssize_t fheap_compact_at
    cdef int64_t* incons_list
    cdef int64_t incons_len
    cdef int64_t incons_cap
    cdef int64_t incons_live

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
    cdef int _init_search(self, object space, object config, int64_t nodes) except -1
    cdef int _seed(self, object s0) except -1
    cdef int _run(self, int64_t n) except -1
    cdef bint _pop_min_f(self, int64_t* s, double* g, double* f) noexcept nogil
    cdef bint _f_live(self, FItem* it) noexcept nogil
    cdef void _compact_fheap(self) noexcept nogil
    cdef int _incons_add(self, int64_t node) noexcept nogil
    cdef void _incons_remove(self, int64_t node) noexcept nogil
    cdef int _merge_incons(self) noexcept nogil
    cdef int _after_improvement(self) except -1
    cdef int _record_goal(self, int64_t s, int i, double g2) except -1
    cdef double _scan_open_min_f(self) noexcept nogil
    cdef void _set_incumbent(self, double cost, object path)
