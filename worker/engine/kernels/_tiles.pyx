# cython: language_level=3, boundscheck=False, wraparound=False, cdivision=True, initializedcheck=False
"""Search a sliding-tile space in compiled code: packed boards, an open-addressing table of nodes.

It reproduces ``worker.domains.tiles``: the board packed ``b`` bits per cell
(b = bit length of cells - 1) into one 64-bit word, so boards of up to 64 bits
(the 8- and 15-puzzle, 2 x 8...) are taken; blank moves up, down, left, right
in that order, each costing 1; h is Manhattan distance plus linear conflicts
(per line, the tiles of that goal line minus the longest run already in goal
order, two moves each), updated from the parent's h by re-scoring only the
one line a move can change. A domain state is ``(board << 24) | (h << 8) | blank``.

Per node: the board, blank cell, g, h, parent and closed flag in flat arrays;
an open-addressing table (board and node number per slot, linear probing, at
most 70% full) finds a board's node. The slots of all successors are
prefetched before any is probed, so their cache misses overlap.
"""

from libc.stdint cimport int64_t, uint32_t, uint64_t, uint8_t
from libc.stdlib cimport calloc, free, malloc, realloc

from worker.engine.kernels._search cimport SearchKernel

# Lines whose packed contents fit in this many bits get their conflicts from a table.
cdef int TABLE_BITS = 16


cdef extern from *:
    """
    #if defined(__GNUC__) || defined(__clang__)
    #define BW_PREFETCH(p) __builtin_prefetch(p)
    #else
    #define BW_PREFETCH(p) ((void)0)
    #endif
    """
    void BW_PREFETCH(const void* p) noexcept nogil


cdef inline uint64_t mix(uint64_t x) noexcept nogil:
    x ^= x >> 33
    x *= 0xff51afd7ed558ccdULL
    x ^= x >> 33
    x *= 0xc4ceb9fe1a85ec53ULL
    x ^= x >> 33
    return x


cdef class TilesKernel(SearchKernel):
    """Anytime weighted A* on a sliding-tile board given by its ``kernel_spec()``."""

    cdef int width, height, cells, bits
    cdef uint64_t mask, goal_board
    cdef int goal_row[64]
    cdef int goal_col[64]
    cdef int* md  # md[v * cells + i]: Manhattan distance of tile v in cell i
    cdef int nmoves[64]
    cdef int move_to[64][4]
    cdef unsigned char move_vertical[64][4]
    cdef uint8_t* row_table  # conflicts-removals per (row, packed row), when small enough
    cdef uint8_t* col_table
    cdef int row_bits, col_bits
    cdef uint64_t* keys
    cdef uint8_t* blanks
    cdef int64_t tiles_cap, nnodes
    cdef uint64_t* slot_key
    cdef uint32_t* slot_node  # node + 1; 0 = empty
    cdef uint64_t slot_mask
    cdef int64_t slot_used
    cdef uint8_t sblank[8]

    def __cinit__(self, *args, **kwargs):
        self.md = NULL
        self.row_table = NULL
        self.col_table = NULL
        self.keys = NULL
        self.blanks = NULL
        self.slot_key = NULL
        self.slot_node = NULL
        self.tiles_cap = 0
        self.nnodes = 0

    def __dealloc__(self):
        free(self.md)
        free(self.row_table)
        free(self.col_table)
        free(self.keys)
        free(self.blanks)
        free(self.slot_key)
        free(self.slot_node)

    def __init__(self, space, config, spec):
        cdef int w = int(spec["width"]), h = int(spec["height"]), n, i, v, k
        tiles, goal = [int(x) for x in spec["tiles"]], [int(x) for x in spec["goal"]]
        n = w * h
        if w < 2 or h < 2 or len(tiles) != n or sorted(tiles) != list(range(n)) or sorted(goal) != list(range(n)):
            raise ValueError("tiles kernel spec: not a board of distinct tiles 0..cells-1")
        self.width, self.height, self.cells = w, h, n
        self.bits = max(1, (n - 1).bit_length())
        if n * self.bits > 64:
            raise ValueError(f"tiles kernel: a {w} x {h} board does not pack into 64 bits")
        self.mask = (1 << self.bits) - 1
        for i, v in enumerate(goal):
            self.goal_row[v], self.goal_col[v] = divmod(i, w)
        self.md = <int*>malloc(n * n * sizeof(int))
        if self.md == NULL:
            raise MemoryError("no memory for the tiles tables")
        for v in range(n):
            for i in range(n):
                self.md[v * n + i] = 0 if v == 0 else abs(i // w - self.goal_row[v]) + abs(i % w - self.goal_col[v])
        for i in range(n):
            k = 0
            for dr, dc, vertical in ((-1, 0, 1), (1, 0, 1), (0, -1, 0), (0, 1, 0)):  # blank up, down, left, right
                if 0 <= i // w + dr < h and 0 <= i % w + dc < w:
                    self.move_to[i][k] = i + dr * w + dc
                    self.move_vertical[i][k] = vertical
                    k += 1
            self.nmoves[i] = k
        self.row_bits, self.col_bits = w * self.bits, h * self.bits
        if self.row_bits <= TABLE_BITS:
            self.row_table = self._line_table(h, w, True)
        if self.col_bits <= TABLE_BITS:
            self.col_table = self._line_table(w, h, False)
        self.goal_board = self.pack(goal)
        self._init_search(space, config, 1 << 12)
        self._grow_slots(1 << 13)
        board = self.pack(tiles)
        self.skey[0] = board
        self.sblank[0] = tiles.index(0)
        self._seed(self.state_of(board, self.full_h(board), tiles.index(0)))

    # -- line conflicts ----------------------------------------------------------------

    cdef int _removals(self, uint64_t content, int length, int line, bint row) noexcept nogil:
        """Return how many goal-line tiles of one packed line must leave it: count - longest in-order run."""
        cdef int tails[64]
        cdef int ntails = 0, count = 0, j, a, x
        cdef int v
        for j in range(length):
            v = <int>((content >> (j * self.bits)) & self.mask)
            if v == 0 or v >= self.cells:
                continue
            if row:
                if self.goal_row[v] != line:
                    continue
                x = self.goal_col[v]
            else:
                if self.goal_col[v] != line:
                    continue
                x = self.goal_row[v]
            count += 1
            a = 0
            while a < ntails and tails[a] < x:
                a += 1
            tails[a] = x
            if a == ntails:
                ntails += 1
        return count - ntails

    cdef uint8_t* _line_table(self, int lines, int length, bint row) except NULL:
        cdef int64_t size = 1 << (length * self.bits), key
        cdef int line
        cdef uint8_t* table = <uint8_t*>malloc(lines * size)
        if table == NULL:
            raise MemoryError("no memory for the line-conflict tables")
        with nogil:
            for line in range(lines):
                for key in range(size):
                    table[line * size + key] = <uint8_t>self._removals(<uint64_t>key, length, line, row)
        return table

    cdef inline int _row_conf(self, int r, uint64_t board) noexcept nogil:
        cdef uint64_t content = (board >> (r * self.row_bits)) & ((<uint64_t>1 << self.row_bits) - 1)
        if self.row_table != NULL:
            return self.row_table[(<int64_t>r << self.row_bits) + <int64_t>content]
        return self._removals(content, self.width, r, True)

    cdef inline int _col_conf(self, int c, uint64_t board) noexcept nogil:
        cdef uint64_t content = 0
        cdef int r
        for r in range(self.height):
            content |= ((board >> ((r * self.width + c) * self.bits)) & self.mask) << (r * self.bits)
        if self.col_table != NULL:
            return self.col_table[(<int64_t>c << self.col_bits) + <int64_t>content]
        return self._removals(content, self.height, c, False)

    # -- the domain ------------------------------------------------------------------------

    cdef int _expand_board(self, uint64_t board, int h0, int p) noexcept nogil:
        cdef int k, q, v, nh, n = self.cells, b = self.bits, w = self.width, gl
        cdef uint64_t nb, j
        cdef uint64_t hv[4]
        for k in range(self.nmoves[p]):
            q = self.move_to[p][k]
            v = <int>((board >> (q * b)) & self.mask)
            nb = board - (<uint64_t>v << (q * b)) + (<uint64_t>v << (p * b))
            hv[k] = mix(nb)
            j = hv[k] & self.slot_mask
            BW_PREFETCH(&self.slot_node[j])
            BW_PREFETCH(&self.slot_key[j])
            nh = h0 - self.md[v * n + q] + self.md[v * n + p]
            if self.move_vertical[p][k]:
                gl = self.goal_row[v]
                if gl == q // w or gl == p // w:
                    nh += 2 * (self._row_conf(gl, nb) - self._row_conf(gl, board))
            else:
                gl = self.goal_col[v]
                if gl == q % w or gl == p % w:
                    nh += 2 * (self._col_conf(gl, nb) - self._col_conf(gl, board))
            self.skey[k] = nb
            self.sblank[k] = <uint8_t>q
            self.scost[k] = 1.0
            self.sh[k] = <double>nh
            self.sgoal[k] = nb == self.goal_board
        self.nsucc = self.nmoves[p]
        for k in range(self.nsucc):
            self.snode[k] = self._find(self.skey[k], hv[k])
        return self.nsucc

    cdef int _expand(self, int64_t s) noexcept nogil:
        return self._expand_board(self.keys[s], <int>self.h[s], self.blanks[s])

    cdef double _heur(self, int i) noexcept nogil:
        return self.sh[i]

    cdef inline int64_t _find(self, uint64_t board, uint64_t hv) noexcept nogil:
        cdef uint64_t j = hv & self.slot_mask
        cdef uint32_t node
        while True:
            node = self.slot_node[j]
            if node == 0:
                return -1
            if self.slot_key[j] == board:
                return <int64_t>node - 1
            j = (j + 1) & self.slot_mask

    cdef int _grow_slots(self, int64_t size) noexcept nogil:
        """Rehash into ``size`` slots (a power of two); return -1 on no memory."""
        cdef uint64_t* new_key = <uint64_t*>malloc(size * sizeof(uint64_t))
        cdef uint32_t* new_node = <uint32_t*>calloc(size, sizeof(uint32_t))
        cdef int64_t old_size = <int64_t>self.slot_mask + 1 if self.slot_node != NULL else 0, i
        cdef uint64_t j, m = <uint64_t>size - 1
        if new_key == NULL or new_node == NULL:
            free(new_key)
            free(new_node)
            return -1
        for i in range(old_size):
            if self.slot_node[i] != 0:
                j = mix(self.slot_key[i]) & m
                while new_node[j] != 0:
                    j = (j + 1) & m
                new_key[j] = self.slot_key[i]
                new_node[j] = self.slot_node[i]
        free(self.slot_key)
        free(self.slot_node)
        self.slot_key = new_key
        self.slot_node = new_node
        self.slot_mask = m
        return 0

    cdef int _grow_nodes(self, int64_t need) noexcept nogil:
        cdef void* p
        if SearchKernel._grow_nodes(self, need) < 0:
            return -1
        if self.tiles_cap < self.nodes_cap:
            p = realloc(self.keys, self.nodes_cap * sizeof(uint64_t))
            if p == NULL:
                return -1
            self.keys = <uint64_t*>p
            p = realloc(self.blanks, self.nodes_cap * sizeof(uint8_t))
            if p == NULL:
                return -1
            self.blanks = <uint8_t*>p
            self.tiles_cap = self.nodes_cap
        return 0

    cdef int64_t _store(self, int i) noexcept nogil:
        cdef int64_t node = self.nnodes
        cdef uint64_t board = self.skey[i], j
        if node >= <int64_t>0xFFFFFFFE or self._grow_nodes(node + 1) < 0:
            return -1
        if (self.slot_used + 1) * 10 > (<int64_t>self.slot_mask + 1) * 7:
            if self._grow_slots(2 * (<int64_t>self.slot_mask + 1)) < 0:
                return -1
        self.keys[node] = board
        self.blanks[node] = self.sblank[i]
        j = mix(board) & self.slot_mask
        while self.slot_node[j] != 0:
            j = (j + 1) & self.slot_mask
        self.slot_key[j] = board
        self.slot_node[j] = <uint32_t>(node + 1)
        self.slot_used += 1
        self.nnodes = node + 1
        return node

    cdef object _node_state(self, int64_t node):
        return self.state_of(self.keys[node], <int>self.h[node], self.blanks[node])

    cdef object _succ_state(self, int i):
        return self.state_of(self.skey[i], <int>self.sh[i], self.sblank[i])

    # -- encoding, checks and figures ----------------------------------------------------------

    def pack(self, tiles):
        """Return the packed board of a tile list."""
        board = 0
        for i, v in enumerate(tiles):
            board |= int(v) << (i * self.bits)
        return board

    def state_of(self, board, h, blank):
        """Return the domain's state for a packed board, its h and its blank cell."""
        return (int(board) << 24) | (int(h) << 8) | int(blank)

    def full_h(self, uint64_t board):
        """Return Manhattan distance plus linear conflicts of a packed board, from scratch."""
        cdef int i, total = 0
        for i in range(self.cells):
            total += self.md[((board >> (i * self.bits)) & self.mask) * self.cells + i]
        for i in range(self.height):
            total += 2 * self._row_conf(i, board)
        for i in range(self.width):
            total += 2 * self._col_conf(i, board)
        return total

    def successors_of(self, state):
        """Return the kernel's ``[(state, cost, is_goal), ...]`` of a domain state, in generation order."""
        cdef int n = self._expand_board(<uint64_t>(state >> 24), (state >> 8) & 0xFFFF, state & 0xFF), i
        return [(self.state_of(self.skey[i], <int>self.sh[i], self.sblank[i]), self.scost[i], bool(self.sgoal[i]))
                for i in range(n)]

    def heuristic_of(self, state):
        """Return the kernel's h of a domain state, computed from its board."""
        return float(self.full_h(<uint64_t>(state >> 24)))

    def memory_bytes(self):
        """Return the bytes held by the node tables, heaps, node index and line tables."""
        extra = self.tiles_cap * (sizeof(uint64_t) + sizeof(uint8_t)) + (self.slot_mask + 1) * (sizeof(uint64_t) + sizeof(uint32_t))
        if self.row_table != NULL:
            extra += self.height << self.row_bits
        if self.col_table != NULL:
            extra += self.width << self.col_bits
        return SearchKernel.memory_bytes(self) + extra
