"""Loader for the WordNet 3.0 noun hierarchy (benchmark data, not part of the library).

Reads ``data.noun`` of the WordNet database as installed by the Debian package
``wordnet-base`` (``sudo apt-get install wordnet-base``; the file is then
``/usr/share/wordnet/data.noun``). The format is documented in WordNet's
``wndb(5)`` manual page: each synset line holds its byte offset, lexicographer
file number, synset type, a hexadecimal word count, the words (each followed by
a lex_id), a three-digit pointer count and the pointers
``symbol offset pos source/target``.

``noun_closure()`` returns the transitive closure of the hypernym (``@``) and
instance-hypernym (``@i``) relations over noun synsets: one row ``(u, v)`` for
every noun ``u`` and every ancestor ``v != u`` of it.
"""

from __future__ import annotations

import os
from typing import List, Tuple

import numpy as np

DEFAULT_PATH = "/usr/share/wordnet/data.noun"
HYPERNYM_SYMBOLS = ("@", "@i")


def read_nouns(path: str = DEFAULT_PATH) -> Tuple[List[str], np.ndarray]:
    """Noun synsets and their direct hypernym edges.

    Returns ``(names, edges)``: ``names[i]`` is ``"first_word.offset"`` of
    synset ``i`` (synsets in file order), ``edges`` an ``(m, 2)`` int64 array of
    ``(hyponym, hypernym)`` rows from the ``@`` and ``@i`` pointers.
    """
    if not os.path.exists(path):
        raise FileNotFoundError(
            f"{path} not found: install the WordNet 3.0 database "
            "(Debian/Ubuntu: sudo apt-get install wordnet-base)"
        )
    offsets: List[int] = []
    names: List[str] = []
    raw: List[Tuple[int, int]] = []
    with open(path, encoding="latin-1") as f:
        for line in f:
            if line.startswith("  "):  # licence header
                continue
            fields = line.split(" | ", 1)[0].split()
            off = int(fields[0])
            w_cnt = int(fields[3], 16)
            words = fields[4 : 4 + 2 * w_cnt : 2]
            pos = 4 + 2 * w_cnt
            p_cnt = int(fields[pos])
            pos += 1
            for _ in range(p_cnt):
                sym, target, tpos = fields[pos], int(fields[pos + 1]), fields[pos + 2]
                pos += 4
                if sym in HYPERNYM_SYMBOLS and tpos == "n":
                    raw.append((off, target))
            offsets.append(off)
            names.append(f"{words[0]}.{off:08d}")
    index = {o: i for i, o in enumerate(offsets)}
    edges = np.array([(index[a], index[b]) for a, b in raw], dtype=np.int64).reshape(-1, 2)
    return names, edges


def closure(n: int, edges: np.ndarray) -> np.ndarray:
    """Transitive closure of a DAG given as ``(child, parent)`` rows: every
    ``(u, ancestor)`` pair, sorted."""
    parents: List[List[int]] = [[] for _ in range(n)]
    for a, b in edges.tolist():
        parents[a].append(b)
    memo: List[frozenset] = [None] * n  # type: ignore[list-item]

    def ancestors(u: int) -> frozenset:
        # iterative post-order, so deep chains do not hit the recursion limit
        stack = [u]
        while stack:
            w = stack[-1]
            if memo[w] is not None:
                stack.pop()
                continue
            todo = [p for p in parents[w] if memo[p] is None]
            if todo:
                stack.extend(todo)
                continue
            acc = set()
            for p in parents[w]:
                acc.add(p)
                acc |= memo[p]
            memo[w] = frozenset(acc)
            stack.pop()
        return memo[u]

    rows = [(u, v) for u in range(n) for v in sorted(ancestors(u))]
    return np.array(rows, dtype=np.int64).reshape(-1, 2)


def noun_closure(path: str = DEFAULT_PATH) -> Tuple[List[str], np.ndarray]:
    """``(names, pairs)``: the noun synsets and the transitive closure of the
    hypernym and instance-hypernym relations (``(hyponym, ancestor)`` rows)."""
    names, edges = read_nouns(path)
    return names, closure(len(names), edges)


if __name__ == "__main__":
    import time

    t = time.perf_counter()
    names, pairs = noun_closure()
    print(f"{len(names)} nouns, {len(pairs)} closure pairs ({time.perf_counter() - t:.1f} s)")
