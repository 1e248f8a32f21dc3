"""The score recipe: cosine, TF-IDF, Jaccard and the blocked top-N against outside references,
the combined score by hand, bids moving a tie, and bad or extreme texts."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.sparse import csr_matrix
from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS, TfidfVectorizer
from sklearn.metrics.pairwise import cosine_similarity

from review_alloc.model import Paper, Reviewer, ScoreRecipe, ScoreTable, Session, Signals
from review_alloc.plan import make_plan
from review_alloc.plan import similarity as sim
from review_alloc.plan.recipe import pair_breakdown, recipe_scores
from review_alloc.plan.rules import PAIR_RULES, PairRules
from review_alloc.plan.similarity import SignalMatrices, jaccard, tfidf_rows


def _unit_log_rows(counts: list[list[int]]) -> csr_matrix:
    """Rows of 1 + log10(tf) weights (0 where tf = 0), scaled to unit length."""
    tf = np.array(counts, dtype=np.float64)
    w = np.where(tf > 0, 1 + np.log10(np.maximum(tf, 1)), 0.0)
    return csr_matrix(w / np.linalg.norm(w, axis=1, keepdims=True))


def test_cosine_matches_the_three_novels_example() -> None:
    # Manning, Raghavan and Schütze, Introduction to Information Retrieval (2008), ch. 6,
    # section 6.3 (the novels example, Figures 6.12 and 6.13): term counts of affection,
    # jealous, gossip, wuthering in SaS, PaP and WH; log frequency weighting, unit length;
    # cos(SaS, PaP) = 0.94, cos(SaS, WH) = 0.79, cos(PaP, WH) = 0.69. The affection counts and
    # the first two jealous counts were checked against a copy of the section's example table;
    # the other counts, the weights and the three cosines are as recalled from the book (from
    # memory), and they agree with one another: the counts give the book's rounded figures.
    counts = {"SaS": [115, 10, 2, 0], "PaP": [58, 7, 0, 0], "WH": [20, 11, 6, 38]}
    papers = _unit_log_rows([counts["SaS"], counts["PaP"]])
    reviewers = _unit_log_rows([counts["PaP"], counts["WH"]])
    # The book's normalised SaS weights: 0.789, 0.515, 0.335, 0.
    assert np.round(papers.toarray()[0], 3).tolist() == [0.789, 0.515, 0.335, 0.0]
    empty = csr_matrix((2, 1))
    m = SignalMatrices(papers, reviewers, empty, empty)
    text, _ = m.pair_values(np.array([0, 1, 1]), np.array([0, 0, 1]))
    assert np.round(text, 2).tolist() == [0.94, 0.79, 0.69]


def _random_texts(rng: np.random.Generator, count: int, vocabulary: list[str]) -> list[str]:
    return [
        " ".join(rng.choice(vocabulary, size=int(rng.integers(0, 40)))) for _ in range(count)
    ]


def _vocabulary(rng: np.random.Generator, size: int) -> list[str]:
    letters = list("abcdefghijklmnopqrstuvwxyz")
    words: set[str] = set()
    while len(words) < size:
        word = "".join(rng.choice(letters, size=int(rng.integers(3, 8))))
        if word not in ENGLISH_STOP_WORDS:
            words.add(word)
    return sorted(words)


def test_tfidf_rows_match_scikit_learn_and_the_documented_formula() -> None:
    rng = np.random.default_rng(7)
    vocabulary = _vocabulary(rng, 60)
    papers = _random_texts(rng, 25, vocabulary)
    reviewers = _random_texts(rng, 18, vocabulary)
    p, r = tfidf_rows(papers, reviewers)
    # scikit-learn's own computation with the options we document (TFIDF_OPTIONS).
    reference = TfidfVectorizer(
        lowercase=True,
        strip_accents="unicode",
        stop_words="english",
        sublinear_tf=True,
        smooth_idf=True,
        norm="l2",
    ).fit_transform(papers + reviewers)
    assert np.allclose(p.toarray(), reference[:25].toarray())
    assert np.allclose(r.toarray(), reference[25:].toarray())
    # scikit-learn's documented formula, by hand: tf 1 + ln(count), idf ln((1+n)/(1+df)) + 1,
    # rows scaled to unit length (User Guide, "Tf-idf term weighting").
    docs = papers + reviewers
    words = sorted({w for d in docs for w in d.split()})
    counts = np.array([[d.split().count(w) for w in words] for d in docs], dtype=np.float64)
    tf = np.where(counts > 0, 1 + np.log(np.maximum(counts, 1)), 0.0)
    df = (counts > 0).sum(axis=0)
    idf = np.log((1 + len(docs)) / (1 + df)) + 1
    w = tf * idf
    norms = np.linalg.norm(w, axis=1, keepdims=True)
    w = np.divide(w, norms, out=np.zeros_like(w), where=norms > 0)
    ours = np.vstack([p.toarray(), r.toarray()])
    assert np.allclose(ours, w)


def test_blocked_top_n_equals_the_full_product(monkeypatch: pytest.MonkeyPatch) -> None:
    rng = np.random.default_rng(11)
    vocabulary = _vocabulary(rng, 40)
    n_p, n_r, top = 30, 23, 5
    session = Session(
        name="s",
        papers=[
            Paper(id=f"P{i}", abstract=t, topics=list(rng.choice(["a", "b", "c", "d"], 2)))
            for i, t in enumerate(_random_texts(rng, n_p, vocabulary))
        ],
        reviewers=[
            Reviewer(id=f"R{j}", profile=t, keywords=list(rng.choice(["a", "b", "c", "e"], 1)))
            for j, t in enumerate(_random_texts(rng, n_r, vocabulary))
        ],
    )
    monkeypatch.setattr(sim, "BLOCK_CELLS", 7 * n_r)  # several blocks of 7 papers
    m = SignalMatrices.of(session)
    reviewer, paper, text, topic = m.top_candidates(1.0, 0.5, top)
    # scikit-learn's plain full product as the reference for the text part.
    full = cosine_similarity(m.paper_text, m.reviewer_text)
    assert np.allclose(text, full[paper, reviewer], rtol=0, atol=sim.BLOCK_PRECISION)
    # Topic part: Jaccard of each pair, by the textbook definition on the sets.
    paper_sets, reviewer_sets = sim.topic_sets(session)
    assert np.allclose(
        topic,
        [jaccard(paper_sets[i], reviewer_sets[j]) for i, j in zip(paper, reviewer, strict=True)],
    )
    jac = np.array([[jaccard(ps, rs) for rs in reviewer_sets] for ps in paper_sets])
    combined = full + 0.5 * jac
    for i in range(n_p):
        mine = reviewer[paper == i]
        order = sorted(range(n_r), key=lambda j: (-combined[i, j], j))
        expected = [j for j in order if combined[i, j] > 0][:top]
        assert sorted(mine.tolist()) == sorted(expected)


def test_jaccard_matches_the_textbook_value() -> None:
    # Leskovec, Rajaraman and Ullman, Mining of Massive Datasets, ch. 3, Example 3.1
    # (recalled from memory): two sets sharing 3 of their 8 elements have similarity 3/8.
    s = frozenset({"a", "b", "c", "d", "e"})
    t = frozenset({"c", "d", "e", "f", "g", "h"})
    assert len(s | t) == 8 and jaccard(s, t) == pytest.approx(3 / 8)
    session = Session(
        name="j",
        papers=[Paper(id="P", topics=sorted(s))],
        reviewers=[Reviewer(id="R", keywords=sorted(t))],
    )
    _, topic = SignalMatrices.of(session).pair_values(np.array([0]), np.array([0]))
    assert topic[0] == pytest.approx(3 / 8)
    assert jaccard(frozenset(), frozenset()) == 0.0


def _hand_case() -> tuple[Session, Signals]:
    session = Session(
        name="hand",
        papers=[
            Paper(id="P1", title="River sediment", abstract="sediment transport in rivers",
                  topics=["hydrology", "sediment"]),
            Paper(id="P2", title="Coral acoustics", abstract="listening to coral reefs",
                  topics=["acoustics"], keywords=["reefs"]),
        ],
        reviewers=[
            Reviewer(id="R1", profile="river sediment transport models", topics=["sediment"]),
            Reviewer(id="R2", profile="underwater acoustics of reefs", topics=["acoustics"],
                     keywords=["reefs", "sound"]),
        ],
    )
    signals = Signals(
        expertise=ScoreTable.from_arrays([0, 1], [1, 0], [0.4, 0.2]),
        bids=ScoreTable.from_arrays([1, 0], [1, 1], [4.0, 0.0]),
    )
    return session, signals


def test_combined_scores_equal_the_recipe_by_hand() -> None:
    session, signals = _hand_case()
    recipe = ScoreRecipe(expertise=2.0, text=1.0, topic=0.5, bid=0.25)
    table = recipe_scores(session, recipe, signals)
    docs = [
        "River sediment\nsediment transport in rivers\n",
        "Coral acoustics\nlistening to coral reefs\nreefs",
        "river sediment transport models\n",
        "underwater acoustics of reefs\nreefs sound",
    ]
    v = TfidfVectorizer(stop_words="english", sublinear_tf=True, strip_accents="unicode")
    rows = v.fit_transform(docs).toarray()
    cos = rows[:2] @ rows[2:].T  # [paper, reviewer]
    topic = {(0, 0): 1 / 2, (0, 1): 0.0, (1, 0): 0.0, (1, 1): 2 / 3}
    expertise = {(0, 1): 0.4, (1, 0): 0.2}  # (reviewer, paper)
    bid = {(1, 1): 1.0, (0, 1): -1.0}  # eager and against
    for j, i, value in zip(table.reviewer, table.paper, table.value, strict=True):
        j, i = int(j), int(i)
        by_hand = (
            2.0 * expertise.get((j, i), 0.0)
            + cos[i, j]
            + 0.5 * topic[(i, j)]
            + 0.25 * bid.get((j, i), 0.0)
        )
        assert value == pytest.approx(max(0.0, by_hand), abs=sim.BLOCK_PRECISION * 4), (j, i)
    # Every pair is a candidate here: each has text, topic, a given score or a bid.
    assert len(table) == 4
    # The report of one pair adds up to the same number, part by part.
    with_recipe = session.model_copy(
        update={"policy": session.policy.model_copy(update={"recipe": recipe}),
                "signals": signals, "scores": table}
    )
    b = pair_breakdown(with_recipe, 0, 1)
    assert b is not None and b.candidate
    assert [p.name for p in b.parts] == ["expertise", "text", "topic", "bid"]
    assert b.parts[3].value == -1.0 and b.parts[3].note == "bid against"
    assert b.score == pytest.approx(table.get(0, 1), abs=sim.BLOCK_PRECISION * 4)


def _tie(bid_word_level: float | None) -> Session:
    same = "glacier melt measured by satellite radar"
    session = Session(
        name="tie",
        papers=[Paper(id="P", abstract=same, reviews=1, min_reviews=1)],
        reviewers=[Reviewer(id="R1", profile=same), Reviewer(id="R2", profile=same)],
    )
    bids = (
        ScoreTable.from_arrays([1], [0], [bid_word_level])
        if bid_word_level is not None
        else ScoreTable.empty()
    )
    recipe = ScoreRecipe()
    signals = Signals(bids=bids)
    return session.model_copy(
        update={
            "policy": session.policy.model_copy(update={"recipe": recipe}),
            "signals": signals,
            "scores": recipe_scores(session, recipe, signals),
        }
    )


@pytest.mark.parametrize(("level", "chosen"), [(4.0, "R2"), (3.0, "R2"), (None, None)])
def test_a_bid_moves_a_tie(level: float | None, chosen: str | None) -> None:
    # Common practice: between equally fitting reviewers, the one who bid for the paper gets it.
    session = _tie(level)
    plan = make_plan(session).plan
    assert len(plan.assignments) == 1
    if chosen is not None:
        assert plan.assignments[0].reviewer == chosen
    else:
        assert session.scores.get(0, 0) == session.scores.get(1, 0)


def test_a_reluctant_bid_moves_a_tie_away() -> None:
    session = _tie(1.0)
    assert make_plan(session).plan.assignments[0].reviewer == "R1"


def test_empty_texts_give_no_text_part_and_no_error() -> None:
    session = Session(
        name="e",
        papers=[Paper(id="P1"), Paper(id="P2", abstract="the and of")],  # only stop words
        reviewers=[Reviewer(id="R1"), Reviewer(id="R2", profile="   ")],
    )
    recipe = ScoreRecipe()
    table = recipe_scores(session, recipe, Signals())
    assert len(table) == 0
    given = Signals(expertise=ScoreTable.from_arrays([0], [1], [0.7]))
    table = recipe_scores(session, recipe, given)
    assert (table.reviewer.tolist(), table.paper.tolist(), table.value.tolist()) == (
        [0],
        [1],
        [0.7],
    )


def test_long_texts_are_refused_beyond_the_limit_and_kept_below() -> None:
    from review_alloc.model import MAX_TEXT_CHARS

    with pytest.raises(ValueError, match=f"at most {MAX_TEXT_CHARS} are kept"):
        Paper(id="P", abstract="word " * (MAX_TEXT_CHARS // 5 + 1))
    long = " ".join(f"term{k % 5000}" for k in range(MAX_TEXT_CHARS // 10))
    session = Session(
        name="l",
        papers=[Paper(id="P", abstract=long)],
        reviewers=[Reviewer(id="R", profile=long), Reviewer(id="Q", profile="term1")],
    )
    table = recipe_scores(session, ScoreRecipe(), Signals())
    # float32 block products: within BLOCK_PRECISION of the exact cosine 1.
    assert table.get(0, 0) == pytest.approx(1.0, abs=sim.BLOCK_PRECISION)
    assert 0 < (table.get(1, 0) or 0) < 1


def test_a_recipe_above_the_highest_score_is_refused() -> None:
    session, signals = _hand_case()
    big = Signals(expertise=ScoreTable.from_arrays([0], [0], [1e6]))
    with pytest.raises(Exception, match="above 1e\\+06; lower the weights"):
        recipe_scores(session, ScoreRecipe(expertise=2.0), big)
    assert math.isfinite(recipe_scores(session, ScoreRecipe(), signals).value.max())


def test_pair_checks_agree_with_the_first_rule_of_codes() -> None:
    from tests.plan.test_planner import random_session

    session = random_session(5)
    session = session.model_copy(
        update={
            "policy": session.policy.model_copy(
                update={"unscored": "exclude", "min_score": 0.3, "require_shared_topic": True}
            )
        }
    )
    rules = PairRules(session)
    for j in range(len(session.reviewers)):
        for i in range(len(session.papers)):
            checks = rules.pair_checks(j, i)
            first = next((k + 1 for k, (_, _, broken) in enumerate(checks) if broken), 0)
            assert first == int(rules.codes(np.array([j]), np.array([i]))[0])
            assert [c[0] for c in checks] == list(PAIR_RULES[1:])
