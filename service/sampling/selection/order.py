"""Explicit identifiers in ascending code point order (UTF-8 byte order), sorted in
numpy by words of their bytes, and the fingerprint of the ordered list."""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import Final

import numpy as np
import numpy.typing as npt

from service.sampling.errors import InvalidInput

# The canonical order of identifiers is the byte order of their UTF-8 encodings (Notes, step 1).
# Python's sorted() compares string objects scattered over the heap one pair at a time; for a
# million identifiers that takes seconds. The functions below sort the encoded bytes with numpy
# instead: each identifier is read as consecutive 8-byte big-endian words, zero-padded at the
# end. Comparing those words as unsigned integers, most significant first, is comparing the
# bytes, and the zero padding sorts a prefix before its extensions exactly as byte order does,
# because no identifier contains a zero byte (U+0000 is refused, and UTF-8 encodes no other
# character with one). The leading bytes common to all identifiers are skipped; then comes
# one full sort on the next word, and sorts of the identifiers still tied only, on the word
# after, until no ties remain. Identifiers still tied when all their bytes have been compared
# are equal. Memory is a few arrays of one entry per identifier.

# _KEEP[r], as stored in memory, keeps the first r bytes of a word and clears the other 8 - r.
_KEEP: Final = np.frombuffer(
    b"".join(b"\xff" * r + b"\x00" * (8 - r) for r in range(9)), dtype=np.uint64
)
_CHUNK: Final = 1 << 16  # identifiers hashed per step of the fingerprint
_LEAST_ROOM: Final = 16  # fewest bits of a word worth packing beside the rank and the index

_Positions = npt.NDArray[np.int64]
_Words = npt.NDArray[np.uint64]


@dataclass(frozen=True, slots=True)
class _Listing:
    """The UTF-8 identifiers joined by zero bytes, located, and their leading words.

    Bytes that every identifier shares at its start (``prefix`` of them) cannot order
    anything, so words are counted after them: word k of an identifier is its bytes
    prefix + 8k to prefix + 8k + 7, zero past its end. ``table[k]`` holds word k of every
    identifier, as stored in memory, for the first few k: as many as the longest identifier
    needs, within about twice the memory of the identifiers themselves. Words beyond the
    table are read from ``padded`` when needed.
    """

    padded: npt.NDArray[np.uint8]  # the joined bytes followed by eight zero bytes
    starts: _Positions  # byte offset of each identifier, in the order given
    lengths: _Positions  # byte length of each identifier
    prefix: int  # number of leading bytes common to all identifiers
    table: _Words  # shape (words, identifiers)

    @classmethod
    def of(cls, joined: bytes, count: int) -> _Listing:
        """Locate the ``count`` identifiers in ``joined`` (separated by single zero bytes)."""
        size = len(joined)
        padded = np.zeros(size + 8, dtype=np.uint8)
        padded[:size] = np.frombuffer(joined, dtype=np.uint8)
        ends = np.empty(count, dtype=np.int64)
        ends[:-1] = np.flatnonzero(padded[:size] == 0)
        ends[-1] = size
        starts = np.empty(count, dtype=np.int64)
        starts[0] = 0
        starts[1:] = ends[:-1] + 1
        lengths = ends - starts
        longest = int(lengths.max())
        same = longest if int(lengths.min()) == longest else None
        prefix, read, stored = 0, 0, None
        while prefix < longest:
            stored = _word_at(padded, starts, lengths, prefix, same)
            word = _values(stored)
            low, high = word.min(), word.max()
            read = prefix
            if low != high:  # the first differing bit is in this word
                prefix += (64 - int(low ^ high).bit_length()) // 8
                break
            prefix += 8
        prefix = min(prefix, longest)  # all equal: everything is common
        needed = (longest - prefix) // 8 + 1  # room for the zero byte after the longest
        columns = min(needed, max(1, (2 * len(padded) + 8 * count) // (8 * count)))
        table = np.empty((columns, count), dtype=np.uint64)
        for k in range(columns):
            if k == 0 and stored is not None and read == prefix:  # the search read it last
                table[0] = stored
            else:
                table[k] = _word_at(padded, starts, lengths, prefix + 8 * k, same)
        return cls(padded, starts, lengths, prefix, table)

    def word(self, index: int, rows: _Positions | None = None) -> _Words:
        """Word ``index`` of the identifiers at ``rows`` (all when None), as big-endian values.

        Compared as unsigned integers, these words order the identifiers as their bytes do.
        """
        if index < len(self.table):
            return _values(self.table[index] if rows is None else self.table[index][rows])
        starts = self.starts if rows is None else self.starts[rows]
        lengths = self.lengths if rows is None else self.lengths[rows]
        return _values(_read_words(self.padded, starts + self.prefix, lengths - self.prefix, index))


def _values(stored: _Words) -> _Words:
    """Words as stored in memory, read as big-endian unsigned integers."""
    return stored.view(">u8").astype(np.uint64)


def _word_at(
    padded: npt.NDArray[np.uint8],
    starts: _Positions,
    lengths: _Positions,
    offset: int,
    same: int | None,
) -> _Words:
    """Bytes ``offset`` to ``offset + 7`` of every identifier, as stored, zero past its end.

    ``same`` is the length of every identifier when they all have one length: the words then
    lie at a fixed stride in ``padded`` and are read without an index.
    """
    if same is None:
        return _read_words(padded, starts + offset, lengths - offset, 0)
    if offset >= same:
        return np.zeros(len(starts), dtype=np.uint64)
    # The last identifier's word ends at most 6 bytes past the joined bytes, within the padding.
    strided = np.ndarray(
        (len(starts),), dtype=np.uint64, buffer=padded, offset=offset, strides=(same + 1,)
    )
    kept = min(same - offset, 8)
    return strided & _KEEP[kept : kept + 1]


def _read_words(
    padded: npt.NDArray[np.uint8], starts: _Positions, lengths: _Positions, index: int
) -> _Words:
    """Word ``index`` of each identifier, as stored in memory, zero past its end."""
    limit = len(padded) - 8
    # Every offset from 0 to `limit` begins eight readable bytes; numpy reads them unaligned.
    words = np.ndarray((limit + 1,), dtype=np.uint64, buffer=padded, strides=(1,))
    offsets = np.minimum(starts + 8 * index, limit)
    return words[offsets] & _KEEP[np.clip(lengths - 8 * index, 0, 8)]


def _code_point_order(listing: _Listing) -> tuple[_Positions, list[int]]:
    """The canonical order of the identifiers, and where any repeated identifiers sit in it.

    Returns ``order`` (``order[p]`` is the index, in the order given, of the identifier at
    canonical position p) and the canonical position of the first of each run of equal
    identifiers (empty when all are distinct).
    """
    count = len(listing.starts)
    order = np.arange(count, dtype=np.int64)
    tied = order.copy()  # canonical positions not yet told apart from a neighbour
    group = np.zeros(count, dtype=np.int64)  # positions with the same number are tied
    repeated: list[int] = []
    index = 0
    while count > 1:
        key = listing.word(index, None if index == 0 else order[tied])
        tied, group = _sort_within(order, tied, group, key)
        if not len(tied):
            break
        # Word `index` is compared; tied identifiers with no bytes beyond it are equal.
        done = listing.lengths[order[tied]] <= listing.prefix + 8 * (index + 1)
        if done.any():
            first = _group_starts(group)
            ended = np.logical_and.reduceat(done, first)
            repeated.extend(tied[first[ended]].tolist())
            keep = np.repeat(~ended, np.diff(np.r_[first, len(tied)]))
            tied, group = tied[keep], group[keep]
            if not len(tied):
                break
        index += 1
    return order, repeated


def _group_starts(group: _Positions) -> _Positions:
    """Where each run of equal group numbers begins."""
    return np.flatnonzero(np.r_[True, group[1:] != group[:-1]])


def _sort_within(
    order: _Positions, tied: _Positions, group: _Positions, key: _Words
) -> tuple[_Positions, _Positions]:
    """Order each group of tied positions by ``key``, in place in ``order``; return new ties.

    ``tied`` lists canonical positions, ascending, in runs of equal ``group`` number; ``key``
    holds one word for the identifier at each of them. The group's dense rank, the key (less
    its minimum, shifted right past the zero bits common to all) and the position's index in
    ``tied`` are packed into one 64-bit integer and the packed values are sorted: a plain
    sort of integers is several times faster than an argsort or a lexsort. When the key has
    more significant bits than the rank and the index leave room for, its high bits are
    sorted on first and the positions they leave tied are sorted on the low bits.
    """
    count = len(tied)
    first = _group_starts(group)
    sizes = np.diff(np.r_[first, count])
    if (key == np.repeat(key[first], sizes)).all():  # the word is common to each group
        return tied, group
    key = key - key.min()
    common = int(np.bitwise_or.reduce(key))
    key >>= np.uint64((common & -common).bit_length() - 1)  # trailing zero bits common to all
    bits = int(key.max()).bit_length()
    rank_bits = (len(first) - 1).bit_length()
    index_bits = (count - 1).bit_length()
    room = 64 - rank_bits - index_bits
    if room < _LEAST_ROOM:  # tens of millions of ties: too many to pack, sort pairs instead
        within = np.lexsort((key, np.repeat(np.arange(len(first)), sizes)))
        order[tied] = order[tied][within]
        key = key[within]
        same = (np.diff(key) == 0) & np.isin(np.arange(1, count), first, invert=True)
        return _still_tied(tied, same)
    rest = None
    if bits > room:
        rest = key & np.uint64((1 << (bits - room)) - 1)
        key >>= np.uint64(bits - room)
        bits = room
    packed = np.repeat(np.arange(len(first), dtype=np.uint64), sizes)
    packed <<= np.uint64(bits)
    packed |= key
    packed <<= np.uint64(index_bits)
    packed |= np.arange(count, dtype=np.uint64)
    packed.sort()
    within = (packed & np.uint64((1 << index_bits) - 1)).astype(np.int64)
    order[tied] = order[tied][within]
    # Equal packed values less the index: same group, same key.
    same = np.diff(packed >> np.uint64(index_bits)) == 0
    if rest is None:
        return _still_tied(tied, same)
    still = np.r_[same, False] | np.r_[False, same]
    tied, group = _still_tied(tied, same)
    return _sort_within(order, tied, group, rest[within][still]) if len(tied) else (tied, group)


def _still_tied(tied: _Positions, same: npt.NDArray[np.bool_]) -> tuple[_Positions, _Positions]:
    """The positions equal to a neighbour (``same[k]``: positions k and k + 1), in groups."""
    still = np.r_[same, False] | np.r_[False, same]
    return tied[still], np.cumsum(np.r_[True, ~same])[still]


def _items_fingerprint(listing: _Listing, order: _Positions) -> bytes:
    """SHA-256 of the identifiers in canonical order, each followed by a zero byte (step 6)."""
    count, prefix = len(order), listing.prefix
    digest = hashlib.sha256(b"items\x00" + count.to_bytes(8, "big"))
    shared = listing.padded[:prefix]  # the first identifier starts at offset 0
    for begin in range(0, count, _CHUNK):
        rows = order[begin : begin + _CHUNK]
        sizes = listing.lengths[rows] + 1  # each identifier with the zero byte after it
        columns = (int(sizes.max()) - prefix + 7) // 8
        if columns <= len(listing.table):
            # The shared bytes and the table hold every byte and the zero after it: lay the
            # rows out and keep each identifier's own bytes.
            block = np.empty((len(rows), prefix + 8 * columns), dtype=np.uint8)
            block[:, :prefix] = shared
            words = np.empty((len(rows), columns), dtype=np.uint64)
            for k in range(columns):
                words[:, k] = listing.table[k][rows]
            block[:, prefix:] = words.view(np.uint8)
            if int(sizes.min()) == int(sizes.max()):
                digest.update(np.ascontiguousarray(block[:, : int(sizes[0])]).data)
            else:
                digest.update(block[np.arange(block.shape[1]) < sizes[:, None]].data)
        else:  # a long identifier in this stretch: gather the bytes one by one
            ends = np.cumsum(sizes)
            offsets = np.repeat(listing.starts[rows] - (ends - sizes), sizes)
            offsets += np.arange(int(ends[-1]), dtype=np.int64)
            digest.update(listing.padded[offsets].data)
    return digest.digest()


def _raise_bad_identifier(items: tuple[object, ...]) -> None:
    """Raise the error for the first identifier that is not a UTF-8 encodable string."""
    for index, item in enumerate(items):
        field = f"population.items[{index}]"
        if not isinstance(item, str):
            raise InvalidInput(field, f"identifiers must be strings, got {type(item).__name__}")
        try:
            item.encode("utf-8")
        except UnicodeEncodeError:
            raise InvalidInput(
                field, f"identifier {item!r} cannot be encoded as UTF-8 (lone surrogate)"
            ) from None
