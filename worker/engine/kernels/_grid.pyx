# cython: language_level=3, boundscheck=False, wraparound=False, cdivision=True, initializedcheck=False
"""Search a grid space in compiled code: per-cell tables, preallocated once.

The successors and heuristic reproduce ``worker.domains.grid`` exactly: the
order N, NE, E, SE, S, SW, W, NW (N, E, S, W with 4 moves), a step into a cell
costs its terrain cost (times sqrt(2) diagonally), a diagonal step needs both
side cells open unless corners may be cut, and h is the scaled octile
(Manhattan) distance to the nearest goal, to the goals' bounding box when
there are many. A cell's node number is its index ``row * width + col``.
"""

from libc.math cimport sqrt
from libc.stdint cimport int64_t, uint64_t
from libc.stdlib cimport calloc, free, malloc
from libc.string cimport memcpy

from worker.engine.kernels._search cimport SearchKernel

# Above this many goals the domain measures h to the goals' bounding box
# (a spec may say otherwise with "exact_goals").
EXACT_GOALS = 8


cdef class GridKernel(SearchKernel):
    """Anytime weighted A* on a grid given by its ``kernel_spec()``."""

    cdef unsigned char* pcost  # terrain costs with a blocked border: no bounds checks
    cdef unsigned char* goal
    cdef int64_t width, height, pw, ngoals
    cdef int64_t* goal_r
    cdef int64_t* goal_c
    cdef int64_t top, bottom, left, right
    cdef bint eight, cut, box
    cdef double scale, kdiag
    cdef double straight[10]
    cdef double diagonal[10]

    def __cinit__(self, *args, **kwargs):
        self.pcost = NULL
        self.goal = NULL
        self.goal_r = NULL
        self.goal_c = NULL

    def __dealloc__(self):
        free(self.pcost)
        free(self.goal)
        free(self.goal_r)
        free(self.goal_c)

    def __init__(self, space, config, spec):
        cdef int64_t w = int(spec["width"]), h = int(spec["height"]), r, c, k
        cdef bytes cost = bytes(spec["cost"])
        cdef const unsigned char* src
        cdef double sqrt2 = sqrt(2.0)
        goals = [int(x) for x in spec["goals"]]
        if w < 1 or h < 1 or len(cost) != w * h or not goals:
            raise ValueError("grid kernel spec: inconsistent sizes")
        if cost.translate(None, bytes(range(10))) or spec["moves"] not in (4, 8):
            raise ValueError("grid kernel spec: costs must be 0-9 and moves 4 or 8")
        self.width, self.height, self.pw = w, h, w + 2
        self.eight = spec["moves"] == 8
        self.cut = bool(spec["corner_cutting"])
        self.scale = float(spec["h_scale"])
        self.kdiag = (sqrt2 - 1.0) * self.scale
        for k in range(10):
            self.straight[k] = <double>k
            self.diagonal[k] = k * sqrt2
        self.pcost = <unsigned char*>calloc(self.pw * (h + 2), 1)
        self.goal = <unsigned char*>calloc(w * h, 1)
        self.ngoals = len(goals)
        self.goal_r = <int64_t*>malloc(self.ngoals * sizeof(int64_t))
        self.goal_c = <int64_t*>malloc(self.ngoals * sizeof(int64_t))
        if self.pcost == NULL or self.goal == NULL or self.goal_r == NULL or self.goal_c == NULL:
            raise MemoryError("no memory for the grid tables")
        src = cost
        for r in range(h):
            memcpy(&self.pcost[(r + 1) * self.pw + 1], &src[r * w], w)
        for k, g in enumerate(goals):
            if not 0 <= g < w * h:
                raise ValueError("grid kernel spec: goal outside the grid")
            self.goal[g] = 1
            self.goal_r[k], self.goal_c[k] = divmod(g, w)
        self.box = self.ngoals > int(spec.get("exact_goals", EXACT_GOALS))
        self.top = min(g // w for g in goals)
        self.bottom = max(g // w for g in goals)
        self.left = min(g % w for g in goals)
        self.right = max(g % w for g in goals)
        self._init_search(space, config, w * h)
        self.skey[0] = <uint64_t>int(spec["start"])
        self._seed(int(spec["start"]))

    # -- the domain ----------------------------------------------------------------

    cdef inline void _add(self, int64_t t, double cost) noexcept nogil:
        cdef int i = self.nsucc
        self.skey[i] = <uint64_t>t
        self.snode[i] = t
        self.scost[i] = cost
        self.sgoal[i] = self.goal[t]
        self.nsucc = i + 1

    cdef int _expand(self, int64_t s) noexcept nogil:
        cdef int64_t w = self.width, pw = self.pw
        cdef int64_t p = (s // w + 1) * pw + s % w + 1
        cdef unsigned char kn = self.pcost[p - pw], ke = self.pcost[p + 1]
        cdef unsigned char ks = self.pcost[p + pw], kw = self.pcost[p - 1], k
        cdef bint eight = self.eight, cut = self.cut
        self.nsucc = 0
        if kn:
            self._add(s - w, self.straight[kn])
        if eight:
            k = self.pcost[p - pw + 1]
            if k and (cut or (kn and ke)):
                self._add(s - w + 1, self.diagonal[k])
        if ke:
            self._add(s + 1, self.straight[ke])
        if eight:
            k = self.pcost[p + pw + 1]
            if k and (cut or (ks and ke)):
                self._add(s + w + 1, self.diagonal[k])
        if ks:
            self._add(s + w, self.straight[ks])
        if eight:
            k = self.pcost[p + pw - 1]
            if k and (cut or (ks and kw)):
                self._add(s + w - 1, self.diagonal[k])
        if kw:
            self._add(s - 1, self.straight[kw])
        if eight:
            k = self.pcost[p - pw - 1]
            if k and (cut or (kn and kw)):
                self._add(s - w - 1, self.diagonal[k])
        return self.nsucc

    cdef inline double _dist(self, int64_t dr, int64_t dc) noexcept nogil:
        if not self.eight:
            return (dr + dc) * self.scale
        if dr > dc:
            return dr * self.scale + dc * self.kdiag
        return dc * self.scale + dr * self.kdiag

    cdef double _cell_h(self, int64_t s) noexcept nogil:
        cdef int64_t r = s // self.width, c = s % self.width, dr, dc, j
        cdef double best, d
        if self.box:
            dr = self.top - r if r < self.top else (r - self.bottom if r > self.bottom else 0)
            dc = self.left - c if c < self.left else (c - self.right if c > self.right else 0)
            return self._dist(dr, dc)
        best = 0.0
        for j in range(self.ngoals):
            dr = r - self.goal_r[j] if r > self.goal_r[j] else self.goal_r[j] - r
            dc = c - self.goal_c[j] if c > self.goal_c[j] else self.goal_c[j] - c
            d = self._dist(dr, dc)
            if j == 0 or d < best:
                best = d
        return best

    cdef double _heur(self, int i) noexcept nogil:
        return self._cell_h(<int64_t>self.skey[i])

    cdef int64_t _store(self, int i) noexcept nogil:
        return <int64_t>self.skey[i]

    # -- checks and figures -------------------------------------------------------------

    def successors_of(self, int64_t cell):
        """Return the kernel's ``[(cell, cost, is_goal), ...]`` of an open cell, in generation order."""
        cdef int n = self._expand(cell), i
        return [(int(self.skey[i]), self.scost[i], bool(self.sgoal[i])) for i in range(n)]

    def heuristic_of(self, int64_t cell):
        """Return the kernel's h of ``cell``."""
        return self._cell_h(cell)

    def memory_bytes(self):
        """Return the bytes held by the search tables, heaps and the grid itself."""
        return SearchKernel.memory_bytes(self) + self.pw * (self.height + 2) + self.width * self.height
