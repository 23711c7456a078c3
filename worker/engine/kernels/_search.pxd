# cython: language_level=3
# The compiled anytime weighted A* core shared by every kernel (see _tables.pxd
# for what a domain kernel supplies).

from libc.stdint cimport int64_t

from worker.engine.kernels._heap cimport FItem
from worker.engine.kernels._tables cimport SearchTables


cdef class SearchKernel(SearchTables):
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

    cdef Py_ssize_t fheap_compact_at
    cdef int _init_search(self, object space, object config, int64_t nodes) except -1
    cdef int _seed(self, object s0) except -1
    cdef int _run(self, int64_t n) except -1
    cdef bint _pop_min_f(self, int64_t* s, double* g, double* f) noexcept nogil
    cdef bint _f_live(self, FItem* it) noexcept nogil
    cdef void _compact_fheap(self) noexcept nogil
    cdef int _merge_incons(self) noexcept nogil
    cdef int _after_improvement(self) except -1
    cdef int _record_goal(self, int64_t s, int i, double g2) except -1
    cdef double _scan_open_min_f(self) noexcept nogil
    cdef void _set_incumbent(self, double cost, object path)
