# cython: language_level=3, boundscheck=False, wraparound=False, initializedcheck=False, cdivision=True
"""One pass over a JSON request body that reads its ``arcs`` member into columns.

Compiled at install time (Cython). :mod:`service.model.fastarcs` is the only caller
and documents the subset of bodies taken; everything here either returns the
columns of exactly that subset or ``None`` ("take the ordinary path").

The scan walks the bytes once, checking the JSON grammar as it goes, and never
builds a Python object per arc: integers go straight into int64 columns, and string
node ids are interned on the fly in a hash table of byte spans (one Python string
per distinct id, made at the end). The top-level members other than ``arcs`` are
only delimited here; the caller decodes each with orjson, which also checks them.

Memory safety: ``bytes`` objects always end in a NUL byte after their last one, and
NUL is not allowed anywhere in JSON, so every loop stops at a byte it does not
expect, at the latest at that terminator; a pointer never passes it.
"""

from libc.stdint cimport INT64_MIN, int64_t, uint64_t
from libc.stdlib cimport free, malloc, realloc
from libc.string cimport memcmp, memcpy, memset
from cpython.bytes cimport PyBytes_AS_STRING, PyBytes_GET_SIZE

ctypedef const unsigned char* cptr

cdef extern from *:
    int __builtin_ctzll(unsigned long long) nogil

# The arc fields this scan reads, in the order of its columns.
cdef enum:
    NFIELDS = 6
    F_FROM = 0
    F_TO = 1
    F_CAPACITY = 2
    F_COST = 3
    F_LOWER = 4
    F_KEY = 5  # an arc's own label: a string or null, never interned

FIELDS = ("from", "to", "capacity", "cost", "lower", "key")

# What the node ids of this body are (one kind per payload).
cdef enum:
    IDS_UNSEEN = 0
    IDS_STRING = 1
    IDS_INT = 2

#: Stands for ``null`` (or an absent capacity) in an int64 column: no integer of at
#: most 18 digits can be it.
NULL_VALUE = -(2 ** 63)
cdef int64_t NULL_SLOT = INT64_MIN
cdef enum:
    # Longest integer this scan reads (in digits); longer ones take the ordinary path.
    MAX_DIGITS = 18
    # Top-level members of a body at most (a request has a handful).
    MAX_MEMBERS = 64
    # Nesting depth at most inside a skipped member (orjson decodes it afterwards).
    MAX_SKIP_DEPTH = 512
    # Longest number with a fraction or an exponent this scan reads.
    MAX_FRACTION_BYTES = 64

cdef struct Column:
    int64_t* data
    Py_ssize_t size
    Py_ssize_t cap

cdef struct Group:  # one distinct string id
    uint64_t head[2]  # its first 16 bytes, zero-padded: most ids compare without the arena
    int64_t start     # its bytes in the arena
    int64_t length
    uint64_t hash

cdef struct Scan:
    cptr base
    cptr end  # the terminating NUL: 8-byte loads are whole while they end by it
    int ids
    int oom
    Column col[NFIELDS]
    Py_ssize_t present[NFIELDS]  # object form: arcs carrying the field
    # Numbers with a fraction or an exponent, as (field, row, byte offset, length)
    # quadruples; their rows hold 0 in ``col`` until :func:`fractions` parses them.
    Column fraction
    # The byte length of each key label (its offset is in ``col[F_KEY]``).
    Column key_length
    # Interned string ids. Their bytes are copied to the arena, not found again in
    # the body: the first mention of an id may lie megabytes back, and comparing
    # against it there would miss the cache on nearly every lookup.
    Group* group
    Py_ssize_t groups
    Py_ssize_t groups_cap
    char* arena
    Py_ssize_t arena_size
    Py_ssize_t arena_cap
    # Open addressing; a slot holds (high 32 bits of the hash) << 32 | group + 1, so
    # most mismatches are told apart without reading the group; 0 is empty.
    uint64_t* table
    int table_bits
    uint64_t seed
    Py_ssize_t probes
    Py_ssize_t lookups


cdef bint little_endian():
    cdef uint64_t one = 1
    return (<unsigned char*>&one)[0] == 1

# The word-at-a-time reads assume little-endian bytes; elsewhere scan() steps aside.
cdef bint LITTLE_ENDIAN = little_endian()


cdef inline cptr skip_ws(cptr p) noexcept nogil:
    while p[0] == 32 or p[0] == 10 or p[0] == 13 or p[0] == 9:
        p += 1
    return p


cdef int grow(void** data, Py_ssize_t* cap, Py_ssize_t need, Py_ssize_t item) noexcept nogil:
    """Make room for ``need`` items (doubling); -1 when memory runs out."""
    cdef Py_ssize_t size = cap[0] if cap[0] else 1024
    cdef void* grown
    while size < need:
        size *= 2
    if size == cap[0]:
        return 0
    grown = realloc(data[0], size * item)
    if grown == NULL:
        return -1
    data[0], cap[0] = grown, size
    return 0


cdef inline int append(Scan* s, Column* c, int64_t value) noexcept nogil:
    if c.size == c.cap and grow(<void**>&c.data, &c.cap, c.size + 1, sizeof(int64_t)) < 0:
        s.oom = 1
        return -1
    c.data[c.size] = value
    c.size += 1
    return 0


cdef inline int push(Scan* s, int field, int64_t value) noexcept nogil:
    return append(s, &s.col[field], value)


cdef cptr read_int(cptr p, int64_t* out) noexcept nogil:
    """A JSON integer of at most MAX_DIGITS digits; NULL for anything else (a
    fraction, an exponent, a leading zero, too many digits)."""
    cdef bint negative = p[0] == 45  # "-"
    cdef int64_t value = 0
    cdef int digits = 0
    if negative:
        p += 1
    if p[0] == 48 and 48 <= p[1] <= 57:  # "0" followed by a digit is not JSON
        return NULL
    while 48 <= p[0] <= 57:
        if digits < MAX_DIGITS:  # past that, refused below (and no overflow on the way)
            value = value * 10 + (p[0] - 48)
        digits += 1
        p += 1
    if digits == 0 or digits > MAX_DIGITS or p[0] == 46 or p[0] == 101 or p[0] == 69:  # ".", "e", "E"
        return NULL
    out[0] = -value if negative else value
    return p


cdef inline cptr skip_digits(cptr p) noexcept nogil:
    """Past one or more digits; NULL when there is none."""
    if not 48 <= p[0] <= 57:
        return NULL
    while 48 <= p[0] <= 57:
        p += 1
    return p


cdef cptr skip_fraction(cptr p) noexcept nogil:
    """Past a JSON number that has a fraction or an exponent (p at its first byte);
    NULL for anything else, or for a token longer than MAX_FRACTION_BYTES."""
    cdef cptr start = p
    cdef bint fraction = False
    if p[0] == 45:
        p += 1
    if p[0] == 48:
        p += 1
    elif 49 <= p[0] <= 57:
        while 48 <= p[0] <= 57:
            p += 1
    else:
        return NULL
    if p[0] == 46:  # "." and at least one digit
        p = skip_digits(p + 1)
        if p == NULL:
            return NULL
        fraction = True
    if p[0] == 101 or p[0] == 69:  # "e" or "E", a sign, at least one digit
        p += 1
        if p[0] == 43 or p[0] == 45:
            p += 1
        p = skip_digits(p)
        if p == NULL:
            return NULL
        fraction = True
    if not fraction or p - start > MAX_FRACTION_BYTES:
        return NULL
    return p


cdef inline uint64_t stops(uint64_t w) noexcept nogil:
    """The high bit of each byte of ``w`` that ends a plain string: a quote, a
    backslash or a control byte. Exact for the lowest such byte (borrows only run
    upwards), which is the one wanted."""
    cdef uint64_t ones = 0x0101010101010101ULL
    cdef uint64_t quote = w ^ (ones * 34)
    cdef uint64_t backslash = w ^ (ones * 92)
    return (((quote - ones) & ~quote) | ((backslash - ones) & ~backslash)
            | ((w - ones * 32) & ~w)) & 0x8080808080808080ULL


cdef cptr read_key(Scan* s, cptr p, cptr* key, Py_ssize_t* length) noexcept nogil:
    """A string without escapes or control bytes (p at its opening quote); NULL otherwise."""
    cdef cptr q = p + 1
    cdef uint64_t word, found
    while q + 8 <= s.end:  # eight bytes at a time
        memcpy(&word, q, 8)
        found = stops(word)
        if found:
            q += __builtin_ctzll(found) >> 3
            break
        q += 8
    while q[0] != 34:  # the rest one at a time (stops at the terminator)
        if q[0] == 92 or q[0] < 32:
            return NULL
        q += 1
    key[0] = p + 1
    length[0] = q - (p + 1)
    return q + 1


cdef inline cptr known_key(Scan* s, cptr p, int* field) noexcept nogil:
    """An arc field name read as one word (p at its opening quote), past its closing
    quote; NULL when it is not one of them as written by serialisers (then
    :func:`read_key` decides)."""
    cdef uint64_t w
    if p + 11 > s.end:
        return NULL
    memcpy(&w, p + 1, 8)
    if (w & 0xFFFFFFFFFFULL) == 0x226D6F7266ULL:  # 'from"'
        field[0] = F_FROM
        return p + 6
    if (w & 0xFFFFFFULL) == 0x226F74ULL:  # 'to"'
        field[0] = F_TO
        return p + 4
    if w == 0x7974696361706163ULL and p[9] == 34:  # 'capacity' '"'
        field[0] = F_CAPACITY
        return p + 10
    if (w & 0xFFFFFFFFFFULL) == 0x2274736F63ULL:  # 'cost"'
        field[0] = F_COST
        return p + 6
    if (w & 0xFFFFFFFFFFFFULL) == 0x227265776F6CULL:  # 'lower"'
        field[0] = F_LOWER
        return p + 7
    if (w & 0xFFFFFFFFULL) == 0x2279656BULL:  # 'key"'
        field[0] = F_KEY
        return p + 5
    return NULL


cdef inline int field_of(cptr k, Py_ssize_t n) noexcept nogil:
    if n == 4 and memcmp(k, b"from", 4) == 0:
        return F_FROM
    if n == 2 and k[0] == 116 and k[1] == 111:  # "to"
        return F_TO
    if n == 8 and memcmp(k, b"capacity", 8) == 0:
        return F_CAPACITY
    if n == 4 and memcmp(k, b"cost", 4) == 0:
        return F_COST
    if n == 5 and memcmp(k, b"lower", 5) == 0:
        return F_LOWER
    if n == 3 and memcmp(k, b"key", 3) == 0:
        return F_KEY
    return -1


cdef inline uint64_t hash_span(cptr k, Py_ssize_t n, cptr end, uint64_t seed) noexcept nogil:
    cdef uint64_t h = seed ^ (<uint64_t>n * 0x9E3779B97F4A7C15ULL)
    cdef uint64_t word
    cdef Py_ssize_t i
    while n >= 8:
        memcpy(&word, k, 8)
        h = (h ^ word) * 0x9E3779B97F4A7C15ULL
        h ^= h >> 29
        k += 8
        n -= 8
    if n:
        if k + 8 <= end:  # one load, the bytes past the id masked off
            memcpy(&word, k, 8)
            word &= (1ULL << (8 * n)) - 1
        else:
            word = 0
            for i in range(n):
                word |= (<uint64_t>k[i]) << (8 * i)
        h = (h ^ word) * 0x9E3779B97F4A7C15ULL
        h ^= h >> 29
    return h * 0xBF58476D1CE4E5B9ULL


cdef inline void load_head(cptr k, Py_ssize_t n, cptr end, uint64_t* head) noexcept nogil:
    """The first 16 bytes of an id, zero-padded (only its own bytes are kept)."""
    cdef Py_ssize_t i
    head[0] = head[1] = 0
    if k + 16 <= end:
        memcpy(head, k, 16)
        if n < 8:
            head[0] &= (1ULL << (8 * n)) - 1
            head[1] = 0
        elif n < 16:
            head[1] &= (1ULL << (8 * (n - 8))) - 1
    else:
        for i in range(n if n < 16 else 16):
            head[i >> 3] |= (<uint64_t>k[i]) << (8 * (i & 7))


cdef int grow_table(Scan* s) noexcept nogil:
    cdef int bits = s.table_bits + 1
    cdef Py_ssize_t size = (<Py_ssize_t>1) << bits
    cdef uint64_t* table = <uint64_t*>malloc(size * sizeof(uint64_t))
    cdef Py_ssize_t g, i
    if table == NULL:
        s.oom = 1
        return -1
    memset(table, 0, size * sizeof(uint64_t))
    for g in range(s.groups):
        i = <Py_ssize_t>(s.group[g].hash >> (64 - bits))
        while table[i]:
            i = (i + 1) & (size - 1)
        table[i] = (s.group[g].hash & 0xFFFFFFFF00000000ULL) | <uint64_t>(g + 1)
    free(s.table)
    s.table, s.table_bits = table, bits
    return 0


cdef int64_t intern(Scan* s, cptr k, Py_ssize_t n) noexcept nogil:
    """The group of this id's bytes (a new one for bytes not seen before); -1 to refuse."""
    cdef uint64_t h = hash_span(k, n, s.end, s.seed)
    cdef uint64_t tag = h & 0xFFFFFFFF00000000ULL
    cdef Py_ssize_t mask = ((<Py_ssize_t>1) << s.table_bits) - 1
    cdef Py_ssize_t i = <Py_ssize_t>(h >> (64 - s.table_bits))
    cdef Py_ssize_t g
    cdef uint64_t slot
    cdef uint64_t head[2]
    cdef Group* known
    load_head(k, n, s.end, head)
    s.lookups += 1
    while True:
        slot = s.table[i]
        if slot == 0:
            break
        if (slot & 0xFFFFFFFF00000000ULL) == tag:
            known = &s.group[<Py_ssize_t>(slot & 0xFFFFFFFFULL) - 1]
            if (known.length == n and known.head[0] == head[0] and known.head[1] == head[1]
                    and (n <= 16 or memcmp(s.arena + known.start + 16, k + 16, n - 16) == 0)):
                return <Py_ssize_t>(slot & 0xFFFFFFFFULL) - 1
        i = (i + 1) & mask
        s.probes += 1
        # Colliding ids cost probes; past this budget (a crafted body, or bad luck)
        # the ordinary path, with Python's own hashing, decodes the body instead.
        if s.probes > 8 * s.lookups + 100000:
            return -1
    if s.groups >= 0x7FFFFFFE:
        return -1
    if ((s.groups == s.groups_cap and grow(<void**>&s.group, &s.groups_cap, s.groups + 1, sizeof(Group)) < 0)
            # (+ 1: the arena exists even when the first id is empty, for memcpy)
            or (s.arena_size + n + 1 > s.arena_cap
                and grow(<void**>&s.arena, &s.arena_cap, s.arena_size + n + 1, 1) < 0)):
        s.oom = 1
        return -1
    g = s.groups
    memcpy(s.arena + s.arena_size, k, n)
    s.group[g].head[0], s.group[g].head[1] = head[0], head[1]
    s.group[g].start, s.group[g].length, s.group[g].hash = s.arena_size, n, h
    s.arena_size += n
    s.table[i] = tag | <uint64_t>(g + 1)
    s.groups += 1
    if 2 * s.groups > mask + 1 and grow_table(s) < 0:
        return -1
    return g


cdef cptr read_id(Scan* s, cptr p, int field) noexcept nogil:
    """A node id (string or integer, one kind per body) into column ``field``."""
    cdef cptr k
    cdef Py_ssize_t n
    cdef int64_t value
    if p[0] == 34:
        if s.ids == IDS_INT:
            return NULL
        s.ids = IDS_STRING
        p = read_key(s, p, &k, &n)
        if p == NULL:
            return NULL
        value = intern(s, k, n)
        if value < 0:
            return NULL
        if push(s, field, value) < 0:
            return NULL
        return p
    if s.ids == IDS_STRING:
        return NULL
    s.ids = IDS_INT
    return read_number(s, p, field)  # which takes null for capacity only


cdef cptr read_number(Scan* s, cptr p, int field) noexcept nogil:
    """A number (an integer for ids), or ``null`` where the field allows it
    (capacity), into ``field``."""
    cdef int64_t value = 0
    cdef cptr q
    if p[0] == 110:  # "n"
        if field != F_CAPACITY or p + 4 > s.end or memcmp(p, b"null", 4) != 0:
            return NULL
        value = NULL_SLOT
        q = p + 4
    else:
        q = read_int(p, &value)
        if q == NULL:
            if field <= F_TO:
                return NULL
            q = skip_fraction(p)
            if q == NULL:
                return NULL
            if (append(s, &s.fraction, field) < 0 or append(s, &s.fraction, s.col[field].size) < 0
                    or append(s, &s.fraction, p - s.base) < 0 or append(s, &s.fraction, q - p) < 0):
                return NULL
    if push(s, field, value) < 0:
        return NULL
    return q


cdef cptr read_label(Scan* s, cptr p) noexcept nogil:
    """An arc's key: a string without escapes (its offset and length) or null."""
    cdef cptr k
    cdef Py_ssize_t n = 0
    cdef int64_t at = NULL_SLOT
    if p[0] == 34:
        p = read_key(s, p, &k, &n)
        if p == NULL:
            return NULL
        at = k - s.base
    elif p + 4 <= s.end and memcmp(p, b"null", 4) == 0:
        p += 4
    else:
        return NULL
    if push(s, F_KEY, at) < 0 or append(s, &s.key_length, n) < 0:
        return NULL
    return p


cdef cptr read_value(Scan* s, cptr p, int field) noexcept nogil:
    if field <= F_TO:
        return read_id(s, p, field)
    if field == F_KEY:
        return read_label(s, p)
    return read_number(s, p, field)


cdef cptr read_arc(Scan* s, cptr p) noexcept nogil:
    """One arc object (p at its "{"): each known field at most once, from and to required."""
    cdef int seen = 0
    cdef int field
    cdef cptr k, q
    cdef Py_ssize_t n
    p = skip_ws(p + 1)
    if p[0] != 34:  # an empty object lacks from and to
        return NULL
    while True:
        q = known_key(s, p, &field)
        if q == NULL:
            p = read_key(s, p, &k, &n)
            if p == NULL:
                return NULL
            field = field_of(k, n)
        else:
            p = q
        if field < 0 or seen & (1 << field):
            return NULL
        seen |= 1 << field
        p = skip_ws(p)
        if p[0] != 58:  # ":"
            return NULL
        p = read_value(s, skip_ws(p + 1), field)
        if p == NULL:
            return NULL
        s.present[field] += 1
        p = skip_ws(p)
        if p[0] == 125:  # "}"
            break
        if p[0] != 44:
            return NULL
        p = skip_ws(p + 1)
        if p[0] != 34:
            return NULL
    if (seen & 3) != 3:
        return NULL
    # An absent capacity means no limit, as null does; absent cost and lower are 0.
    if not seen & (1 << F_CAPACITY) and push(s, F_CAPACITY, NULL_SLOT) < 0:
        return NULL
    if not seen & (1 << F_COST) and push(s, F_COST, 0) < 0:
        return NULL
    if not seen & (1 << F_LOWER) and push(s, F_LOWER, 0) < 0:
        return NULL
    if not seen & (1 << F_KEY) and (push(s, F_KEY, NULL_SLOT) < 0 or append(s, &s.key_length, 0) < 0):
        return NULL
    return p + 1


cdef cptr read_array(Scan* s, cptr p, int field) noexcept nogil:
    """An array (p at its "["): of arc objects for ``field`` -1 (the object form), else
    of the values of one column (the columnar form)."""
    p = skip_ws(p + 1)
    if p[0] == 93:  # "]"
        return p + 1
    while True:
        if field >= 0:
            p = read_value(s, p, field)
        elif p[0] == 123:  # "{"
            p = read_arc(s, p)
        else:
            return NULL
        if p == NULL:
            return NULL
        p = skip_ws(p)
        if p[0] == 93:
            return p + 1
        if p[0] != 44:  # ","
            return NULL
        p = skip_ws(p + 1)


cdef cptr read_column_arcs(Scan* s, cptr p) noexcept nogil:
    """An object of columns (p at its "{"): known fields, each at most once."""
    cdef int seen = 0
    cdef int field
    cdef cptr k
    cdef Py_ssize_t n
    p = skip_ws(p + 1)
    if p[0] == 125:
        return p + 1
    while True:
        if p[0] != 34:
            return NULL
        p = read_key(s, p, &k, &n)
        if p == NULL:
            return NULL
        field = field_of(k, n)
        if field < 0 or seen & (1 << field):
            return NULL
        seen |= 1 << field
        s.present[field] = 1
        p = skip_ws(p)
        if p[0] != 58:
            return NULL
        p = skip_ws(p + 1)
        if p[0] != 91:  # "["
            return NULL
        p = read_array(s, p, field)
        if p == NULL:
            return NULL
        p = skip_ws(p)
        if p[0] == 125:
            return p + 1
        if p[0] != 44:
            return NULL
        p = skip_ws(p + 1)


cdef cptr skip_string(cptr p) noexcept nogil:
    """Past a string (p at its opening quote), escapes included; NULL at the terminator."""
    p += 1
    while p[0] != 34:
        if p[0] == 0:
            return NULL
        if p[0] == 92:
            p += 1
            if p[0] == 0:
                return NULL
        p += 1
    return p + 1


cdef cptr skip_value(cptr p, cptr end) noexcept nogil:
    """Past one JSON value (its end only: orjson checks the value itself later)."""
    cdef int depth = 0
    if p[0] == 34:
        return skip_string(p)
    if p[0] != 123 and p[0] != 91:  # a scalar runs to the next delimiter
        while p < end and p[0] not in b' \t\r\n,}]' and p[0] != 0:
            p += 1
        return p
    while p < end:
        if p[0] == 34:
            p = skip_string(p)
            if p == NULL:
                return NULL
            continue
        if p[0] == 123 or p[0] == 91:
            depth += 1
            if depth > MAX_SKIP_DEPTH:
                return NULL
        elif p[0] == 125 or p[0] == 93:
            depth -= 1
            if depth == 0:
                return p + 1
        elif p[0] == 0:
            return NULL
        p += 1
    return NULL


cdef void release(Scan* s) noexcept nogil:
    cdef int f
    for f in range(NFIELDS):
        free(s.col[f].data)
    free(s.fraction.data)
    free(s.key_length.data)
    free(s.group)
    free(s.arena)
    free(s.table)


cdef list labels(Scan* s):
    """The key column as the ordinary path has it: a str or None per arc.

    Raises UnicodeDecodeError for a label that is not UTF-8.
    """
    cdef Py_ssize_t i, n = s.col[F_KEY].size
    cdef int64_t* at = s.col[F_KEY].data
    cdef int64_t* length = s.key_length.data
    cdef list out = [None] * n
    for i in range(n):
        if at[i] != NULL_SLOT:
            out[i] = s.base[at[i]: at[i] + length[i]].decode("utf-8")
    return out


cdef bytearray take(Column* c):
    """The column as the bytes of an int64 array (native order)."""
    cdef bytearray out = bytearray(c.size * sizeof(int64_t))
    if c.size:
        memcpy(<char*>out, c.data, c.size * sizeof(int64_t))
    return out


cdef extern from "Python.h":
    double PyOS_string_to_double(const char* s, char** endptr, void* overflow_exception) except? -1.0


cdef dict fractions(Scan* s):
    """The numbers with a fraction or an exponent, per field: ``(rows, values)`` as the
    bytes of an int64 and a float64 array; None when one is beyond a double's range
    (orjson refuses those: the ordinary path says so).

    Python's own conversion (correctly rounded, as orjson's is) reads each token.
    """
    cdef dict out = {}
    cdef int f
    cdef Py_ssize_t i, n, count = s.fraction.size // 4
    cdef int64_t* q = s.fraction.data
    cdef char* stop
    cdef double value
    cdef bytearray rows, values
    for f in range(NFIELDS):
        n = 0
        for i in range(count):
            n += q[4 * i] == f
        if n == 0:
            continue
        rows = bytearray(n * sizeof(int64_t))
        values = bytearray(n * sizeof(double))
        n = 0
        for i in range(count):
            if q[4 * i] != f:
                continue
            value = PyOS_string_to_double(<const char*>(s.base + q[4 * i + 2]), &stop, NULL)
            if stop != <char*>(s.base + q[4 * i + 2] + q[4 * i + 3]) or value != value or value - value != 0:
                return None  # not the whole token, or infinite
            (<int64_t*><char*>rows)[n] = q[4 * i + 1]
            (<double*><char*>values)[n] = value
            n += 1
        out[FIELDS[f]] = (rows, values)
    return out


cdef inline void mention(int64_t* code, int64_t* new, int64_t* order, Py_ssize_t* nxt) noexcept nogil:
    """Renumber one arc end; its id gets the next number at its first mention."""
    cdef int64_t g = code[0]
    if new[g] < 0:
        new[g] = nxt[0]
        order[nxt[0]] = g
        nxt[0] += 1
    code[0] = new[g]


cdef list renumber(Scan* s):
    """Number the string ids in order of first mention (``from`` before ``to`` within
    an arc, as the contract orders nodes) and make one Python string per id.

    Raises UnicodeDecodeError for an id that is not UTF-8.
    """
    cdef Py_ssize_t nf = s.col[F_FROM].size, nt = s.col[F_TO].size
    cdef Py_ssize_t i, g, nxt = 0, most = nf if nf > nt else nt
    cdef int64_t* fr = s.col[F_FROM].data
    cdef int64_t* to = s.col[F_TO].data
    cdef int64_t* new = <int64_t*>malloc((s.groups + 1) * sizeof(int64_t))
    cdef int64_t* order = <int64_t*>malloc((s.groups + 1) * sizeof(int64_t))
    cdef list names
    if new == NULL or order == NULL:
        free(new)
        free(order)
        raise MemoryError
    try:
        with nogil:
            for g in range(s.groups):
                new[g] = -1
            for i in range(most):
                if i < nf:
                    mention(&fr[i], new, order, &nxt)
                if i < nt:
                    mention(&to[i], new, order, &nxt)
        names = [None] * nxt
        for i in range(nxt):
            g = order[i]
            names[i] = s.arena[s.group[g].start: s.group[g].start + s.group[g].length].decode("utf-8")
        return names
    finally:
        free(new)
        free(order)


def scan(bytes raw, unsigned long long seed):
    """Read the ``arcs`` member of a request body.

    Parameters
    ----------
    raw : bytes
        The body.
    seed : int
        Seeds the hash of string ids (a per-process random number).

    Returns
    -------
    tuple or None
        ``None`` when the body is outside the subset (see :mod:`service.model.fastarcs`).
        Otherwise ``(form, members, columns, names, fractions)``: ``form`` is
        ``"objects"`` or ``"columns"``; ``members`` lists ``(key, start, stop)`` byte
        spans of the other top-level members, in order; ``columns`` maps each field
        present to the bytes of an int64 array (string ids as indices into ``names``,
        ``null`` as :data:`NULL_VALUE`, 0 for a number with a fraction); ``names`` is
        the list of distinct string ids in order of first mention, or None for integer
        ids; ``fractions`` maps a field to the rows and float64 values of its numbers
        with a fraction or an exponent.
    """
    cdef Scan s
    cdef cptr p = <cptr>PyBytes_AS_STRING(raw)
    cdef cptr end = p + PyBytes_GET_SIZE(raw)
    cdef cptr k
    cdef cptr value_end
    cdef Py_ssize_t n
    cdef int form = 0  # 1 objects, 2 columns
    cdef int f
    cdef list members = []
    if not LITTLE_ENDIAN:
        return None
    memset(&s, 0, sizeof(Scan))
    s.base, s.end, s.seed, s.table_bits = p, end, seed, 9
    s.table = <uint64_t*>malloc(((<Py_ssize_t>1) << s.table_bits) * sizeof(uint64_t))
    if s.table == NULL:
        raise MemoryError
    memset(s.table, 0, ((<Py_ssize_t>1) << s.table_bits) * sizeof(uint64_t))
    try:
        p = skip_ws(p)
        if p[0] != 123:
            return None
        p = skip_ws(p + 1)
        while p[0] != 125:
            if p[0] != 34 or len(members) >= MAX_MEMBERS:
                return None
            p = read_key(&s, p, &k, &n)
            if p == NULL:
                return None
            p = skip_ws(p)
            if p[0] != 58:
                return None
            p = skip_ws(p + 1)
            if n == 4 and memcmp(k, b"arcs", 4) == 0:
                if form:
                    return None  # a second arcs member: the ordinary path decides
                if p[0] == 91:
                    form = 1
                    with nogil:
                        value_end = read_array(&s, p, -1)
                elif p[0] == 123:
                    form = 2
                    with nogil:
                        value_end = read_column_arcs(&s, p)
                else:
                    return None
            else:
                value_end = skip_value(p, end)
                if value_end != NULL:
                    members.append((raw[k - s.base: k - s.base + n], p - s.base, value_end - s.base))
            if s.oom:
                raise MemoryError
            if value_end == NULL or value_end > end:
                return None
            p = skip_ws(value_end)
            if p[0] == 44:
                p = skip_ws(p + 1)
                if p[0] != 34:
                    return None
            elif p[0] != 125:
                return None
        if skip_ws(p + 1) != end or not form or s.ids == IDS_UNSEEN:
            return None
        names = None
        try:
            if s.ids == IDS_STRING:
                names = renumber(&s)
            columns = {}
            for f in range(NFIELDS):
                if s.present[f]:
                    columns[FIELDS[f]] = take(&s.col[f]) if f != F_KEY else labels(&s)
        except UnicodeDecodeError:
            return None
        split = fractions(&s) if s.fraction.size else {}
        if split is None:
            return None
        return ("objects" if form == 1 else "columns"), members, columns, names, split
    finally:
        release(&s)
