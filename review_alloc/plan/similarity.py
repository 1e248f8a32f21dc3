"""Text similarity (TF-IDF cosine) and topic overlap (Jaccard) between papers and reviewers.

Text: a paper's document is its title, abstract and keywords; a reviewer's is their profile and
keywords. Both sides are weighted by one scikit-learn `TfidfVectorizer` fitted on all of them
(`TFIDF_OPTIONS`: lower case, accents stripped, English stop words dropped, sublinear term
frequency, smoothed IDF, rows scaled to unit length), so the cosine of two documents is the dot
product of their rows, from 0 to 1. The vectorizer's vocabulary is sorted, so the same texts
give the same numbers on every run and machine.

Topics: a side's set is its declared topics and its keywords, folded as the shared-topic rule
folds them (`plan.rules.fold_topic`); the overlap is the Jaccard index |A ∩ B| / |A ∪ B|
(0 when both sets are empty).

On a large venue (20,000 papers, 15,000 reviewers) the full product would be 300 million
numbers, so `top_candidates` works on blocks of papers: a sparse product per block, made dense
only for the block, from which each paper keeps its best `top` reviewers (ties go to the
earlier reviewer) before the next block is formed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.sparse import csr_matrix

from review_alloc.model import Session
from review_alloc.plan.rules import fold_topic

TFIDF_OPTIONS: dict[str, object] = {
    "lowercase": True,
    "strip_accents": "unicode",
    "stop_words": "english",
    "sublinear_tf": True,
    "smooth_idf": True,
    "norm": "l2",
    "dtype": np.float64,
}
"""The options given to scikit-learn's `TfidfVectorizer` (all documented there)."""

BLOCK_PRECISION = 1e-5
"""How close the float32 block products keep a text or topic value to its float64 value."""

BLOCK_CELLS = 12_000_000
"""Dense cells per block of the product (about 48 MB per float32 matrix): memory, not speed,
sets it; a block keeps at least one paper."""


def paper_text(session: Session, i: int) -> str:
    """The text a paper is compared by: its title, abstract and keywords."""
    p = session.papers[i]
    return "\n".join([p.title, p.abstract, " ".join(p.keywords)])


def reviewer_text(session: Session, j: int) -> str:
    """The text a reviewer is compared by: their profile and keywords."""
    r = session.reviewers[j]
    return "\n".join([r.profile, " ".join(r.keywords)])


def tfidf_rows(paper_docs: list[str], reviewer_docs: list[str]) -> tuple[csr_matrix, csr_matrix]:
    """Unit-length TF-IDF rows of the papers' and reviewers' documents over one vocabulary
    (all zero when no document holds a word the vectorizer keeps)."""
    from sklearn.feature_extraction.text import TfidfVectorizer

    docs = [*paper_docs, *reviewer_docs]
    try:
        matrix = TfidfVectorizer(**TFIDF_OPTIONS).fit_transform(docs)  # type: ignore[arg-type]
    except ValueError:
        # scikit-learn refuses an empty vocabulary (every text blank or only stop words).
        matrix = csr_matrix((len(docs), 1), dtype=np.float64)
    matrix = csr_matrix(matrix, dtype=np.float64)
    return matrix[: len(paper_docs)], matrix[len(paper_docs) :]


def topic_sets(session: Session) -> tuple[list[frozenset[str]], list[frozenset[str]]]:
    """Each paper's and each reviewer's topics and keywords, folded."""
    return (
        [frozenset(fold_topic(t) for t in [*p.topics, *p.keywords]) for p in session.papers],
        [frozenset(fold_topic(t) for t in [*r.topics, *r.keywords]) for r in session.reviewers],
    )


def jaccard(a: frozenset[str], b: frozenset[str]) -> float:
    """The Jaccard index of two sets, 0 when both are empty."""
    union = len(a | b)
    return len(a & b) / union if union else 0.0


def _incidence(sets: list[frozenset[str]], vocab: dict[str, int]) -> csr_matrix:
    rows = [k for k, found in enumerate(sets) for _ in found]
    cols = [vocab[t] for found in sets for t in found]
    return csr_matrix(
        (np.ones(len(rows), dtype=np.float64), (rows, cols)),
        shape=(len(sets), max(len(vocab), 1)),
    )


@dataclass(frozen=True)
class SignalMatrices:
    """The two sides as sparse rows: unit TF-IDF rows and topic incidence rows."""

    paper_text: csr_matrix
    reviewer_text: csr_matrix
    paper_topics: csr_matrix
    reviewer_topics: csr_matrix

    @classmethod
    def of(cls, session: Session) -> SignalMatrices:
        """The matrices of a session's papers and reviewers."""
        n_p, n_r = len(session.papers), len(session.reviewers)
        pt, rt = tfidf_rows(
            [paper_text(session, i) for i in range(n_p)],
            [reviewer_text(session, j) for j in range(n_r)],
        )
        paper_sets, reviewer_sets = topic_sets(session)
        words = sorted(frozenset().union(*paper_sets, *reviewer_sets))
        vocab = {t: k for k, t in enumerate(words)}
        return cls(pt, rt, _incidence(paper_sets, vocab), _incidence(reviewer_sets, vocab))

    def pair_values(self, reviewer: np.ndarray, paper: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(text cosine, topic Jaccard) of each (reviewer, paper) position pair."""
        reviewer = np.asarray(reviewer, dtype=np.int64)
        paper = np.asarray(paper, dtype=np.int64)
        text = np.zeros(len(paper))
        topic = np.zeros(len(paper))
        step = 50_000
        for start in range(0, len(paper), step):
            r, p = reviewer[start : start + step], paper[start : start + step]
            text[start : start + step] = _row_dots(self.paper_text[p], self.reviewer_text[r])
            inter = _row_dots(self.paper_topics[p], self.reviewer_topics[r])
            sizes = _row_sizes(self.paper_topics)[p] + _row_sizes(self.reviewer_topics)[r]
            union = sizes - inter
            topic[start : start + step] = np.divide(
                inter, union, out=np.zeros(len(p)), where=union > 0
            )
        return np.clip(text, 0.0, 1.0), topic

    def top_candidates(
        self, text_weight: float, topic_weight: float, top: int
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Per paper its best `top` reviewers by `text_weight * text + topic_weight * topic`
        (only pairs where that is above 0): (reviewer, paper, text, topic) arrays."""
        n_p, n_r = self.paper_text.shape[0], self.reviewer_text.shape[0]
        found: list[tuple[np.ndarray, ...]] = []
        if n_p == 0 or n_r == 0 or (text_weight <= 0 and topic_weight <= 0):
            empty = np.zeros(0, dtype=np.int64)
            return empty, empty, np.zeros(0), np.zeros(0)
        keep = min(top, n_r)
        # The products run in float32: half the memory traffic of the dense blocks; a kept
        # value is within `BLOCK_PRECISION` of its float64 cosine, far below the planner's
        # score step (1e-4).
        text = _SplitProduct(self.paper_text, self.reviewer_text) if text_weight > 0 else None
        paper_topics = self.paper_topics.astype(np.float32)
        topic_t = self.reviewer_topics.T.tocsr().astype(np.float32)
        reviewer_sizes = _row_sizes(self.reviewer_topics).astype(np.float32)
        paper_sizes = _row_sizes(self.paper_topics).astype(np.float32)
        block = max(1, BLOCK_CELLS // n_r)
        for start in range(0, n_p, block):
            stop = min(start + block, n_p)
            shape = (stop - start, n_r)
            cos = text.block(start, stop) if text is not None else np.zeros(shape, np.float32)
            topic = np.zeros(shape, dtype=np.float32)
            if topic_weight > 0:
                topic = (paper_topics[start:stop] @ topic_t).toarray()
                union = paper_sizes[start:stop, None] + reviewer_sizes[None, :] - topic
                np.divide(topic, union, out=topic, where=union > 0)
                del union
            combined = cos * np.float32(text_weight)
            if topic_weight > 0:
                combined += np.float32(topic_weight) * topic
            rows, cols = _best_per_row(combined, keep)
            del combined
            found.append(
                (
                    cols.astype(np.int64),
                    rows.astype(np.int64) + start,
                    np.clip(cos[rows, cols], 0.0, 1.0).astype(np.float64),
                    topic[rows, cols].astype(np.float64),
                )
            )
            del cos, topic
        reviewer, paper, text_v, topic_v = (
            np.concatenate(parts) for parts in zip(*found, strict=True)
        )
        return reviewer, paper, text_v, topic_v


DENSE_TERM_SHARE = 1 / 64
"""A word goes to the dense product when the pairs it touches (papers having it x reviewers
having it) exceed this share of all pairs: BLAS multiplies dense blocks far faster than a
sparse product scatters, and the few common words make most of the sparse product's work."""

MAX_DENSE_TERMS = 2048


class _SplitProduct:
    """The product of unit TF-IDF rows, papers x reviewers, block by block: common words
    through a dense float32 matrix product, the rest through a sparse one; the sum is the same
    cosine (each word's products land in one of the two)."""

    def __init__(self, papers: csr_matrix, reviewers: csr_matrix) -> None:
        n_p, n_r = papers.shape[0], reviewers.shape[0]
        width = papers.shape[1]
        df_p = np.bincount(papers.indices, minlength=width).astype(np.float64)
        df_r = np.bincount(reviewers.indices, minlength=width).astype(np.float64)
        load = df_p * df_r
        common = np.flatnonzero(load > DENSE_TERM_SHARE * n_p * n_r)
        if len(common) > MAX_DENSE_TERMS:
            common = common[np.argsort(-load[common], kind="stable")[:MAX_DENSE_TERMS]]
        common = np.sort(common)
        rare = np.setdiff1d(np.arange(width), common)
        self.dense_p = papers[:, common].toarray().astype(np.float32)
        self.dense_r_t = np.ascontiguousarray(
            reviewers[:, common].toarray().astype(np.float32).T
        )
        self.sparse_p = papers[:, rare].tocsr().astype(np.float32)
        self.sparse_r_t = reviewers[:, rare].T.tocsr().astype(np.float32)

    def block(self, start: int, stop: int) -> np.ndarray:
        """The cosines of papers `start:stop` with every reviewer, dense float32."""
        out = self.dense_p[start:stop] @ self.dense_r_t
        out += (self.sparse_p[start:stop] @ self.sparse_r_t).toarray()
        return out


def _row_dots(a: csr_matrix, b: csr_matrix) -> np.ndarray:
    """The dot product of row k of `a` with row k of `b`, for every k."""
    return np.asarray(a.multiply(b).sum(axis=1), dtype=np.float64).ravel()


def _row_sizes(m: csr_matrix) -> np.ndarray:
    return np.diff(m.indptr).astype(np.float64)


def _best_per_row(values: np.ndarray, keep: int) -> tuple[np.ndarray, np.ndarray]:
    """(row, column) of each row's `keep` largest values above 0; on a tie at the cut the
    earlier columns win, so the choice is the same on every run."""
    n_rows, n_cols = values.shape
    if keep >= n_cols:
        return np.nonzero(values > 0)
    top = np.argpartition(values, n_cols - keep, axis=1)[:, n_cols - keep :]
    cut = np.take_along_axis(values, top, axis=1).min(axis=1)
    level = values == cut[:, None]
    above = (values > cut[:, None]).sum(axis=1)
    # Rows whose cut value repeats beyond the room left pick the earliest columns at the cut;
    # elsewhere the partition's choice is already the only one.
    tied = np.flatnonzero(above + level.sum(axis=1) > keep)
    rows = np.repeat(np.arange(n_rows), keep)
    cols = top.ravel()
    if len(tied):
        fixed = np.ones(n_rows, dtype=bool)
        fixed[tied] = False
        sub = values[tied]
        chosen = (sub > cut[tied, None]) | (
            level[tied] & (np.cumsum(level[tied], axis=1) <= (keep - above[tied])[:, None])
        )
        t_rows, t_cols = np.nonzero(chosen)
        keep_rows = fixed[rows]
        rows = np.concatenate([rows[keep_rows], tied[t_rows]])
        cols = np.concatenate([cols[keep_rows], t_cols])
    positive = values[rows, cols] > 0
    return rows[positive], cols[positive]
