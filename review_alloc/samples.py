"""The built-in demo sessions: invented venues, people and institutions, from fixed seeds.

Nothing here describes a real venue or person. `sample_sessions/build.py` writes these sessions
to files; `review-alloc` with no arguments opens the workshop.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from review_alloc.model import (
    BID_LEVELS,
    ConflictRules,
    Paper,
    Policy,
    Reviewer,
    ScoreRecipe,
    ScoreTable,
    Session,
    Signals,
)
from review_alloc.model import Conflict as DeclaredConflict

_GIVEN = (
    "Ada Bela Cyra Dario Eun Farid Greta Hiro Ines Jonas Kaia Lior Mina Noor Oskar Priya Quin "
    "Rafa Sade Tomas Uma Vikram Wen Xavi Yara Zeno Amara Bram Chiara Dmitri Elin Femi Goran "
    "Hana Ivo Jana Kofi Lena Matteo Nika Olu Paz Rhea Soren Taini Ulla Vesna Wiebke Yusuf Zora"
).split()
_FAMILY_A = (
    "Al Bre Cor Dal Ek Fen Gar Hol Ist Jor Kel Lund Mor Nes Or Pell Quar Ros Sten Tav Ur Vor Wyn"
).split()
_FAMILY_B = (
    "brand court dahl engel fors gaard holm kvist lind marsh nov rath sey toft vang wick".split()
)
_PLACE_A = (
    "Ost Marrow Wren Kel Dune Ash Bram Cal Tor Vell Hal Quen Ril Sel Yr Carn Lis Morv".split()
)
_PLACE_B = "brook mere holt reach stead haven moor crest vale strand gate wold".split()
_KINDS = ("University of {}", "{} Institute of Technology", "{} Research Centre", "{} College")


def _people(rng: np.random.Generator, count: int) -> list[str]:
    names: set[str] = set()
    out: list[str] = []
    while len(out) < count:
        family = rng.choice(_FAMILY_A) + rng.choice(_FAMILY_B)
        name = f"{rng.choice(_GIVEN)} {family}"
        if name not in names:
            names.add(name)
            out.append(name)
    return out


def _institutions(rng: np.random.Generator, count: int) -> list[tuple[str, str]]:
    """(name, mail domain) pairs; domains use the reserved .example top-level domain."""
    seen: set[str] = set()
    out: list[tuple[str, str]] = []
    while len(out) < count:
        place = rng.choice(_PLACE_A) + rng.choice(_PLACE_B)
        if place in seen:
            continue
        seen.add(place)
        kind = _KINDS[int(rng.integers(len(_KINDS)))]
        out.append((kind.format(place), f"{place.lower()}.example"))
    return out


def _email(name: str, domain: str) -> str:
    return f"{name.lower().replace(' ', '.')}@{domain}"


def _build(
    *,
    name: str,
    kind: str,
    seed: int,
    topics: list[str],
    n_papers: int,
    n_reviewers: int,
    n_institutions: int,
    policy: Policy,
    caps: tuple[int, int],
    senior_share: float,
    candidates: int | None,
    # candidates: None scores every pair; otherwise the reviewers sharing a topic plus this many
    # chosen at random are scored (the rest are unscored).
    scarce: tuple[str, int, int] | None = None,
    declared: int = 0,
    title_words: tuple[str, ...] = (),
    id_prefix: str = "P",
    signals: bool = False,
    # signals: invent abstracts, profiles, keywords and bids, and make the scores with the
    # default score recipe (the topic-driven scores above become its given expertise).
) -> Session:
    """One invented venue: topic-driven scores, some author reviewers, a few declared conflicts."""
    rng = np.random.default_rng(seed)
    institutions = _institutions(rng, n_institutions)
    people = _people(rng, n_reviewers + 3 * n_papers)
    scarce_topic, scarce_papers, scarce_reviewers = scarce if scarce else ("", 0, 0)
    common = [t for t in topics if t != scarce_topic]

    reviewers: list[Reviewer] = []
    for j in range(n_reviewers):
        inst, domain = institutions[int(rng.integers(len(institutions)))]
        if j < scarce_reviewers:
            own = [scarce_topic]
        else:
            own = list(rng.choice(common, size=int(rng.integers(2, 4)), replace=False))
        reviewers.append(
            Reviewer(
                id=f"R{j + 1:04d}",
                name=people[j],
                email=_email(people[j], domain),
                institution=inst,
                topics=own,
                cap=int(rng.integers(caps[0], caps[1] + 1)),
                # Reviewers of the scarce topic are its few experts, so they are all senior.
                senior=bool(rng.random() < senior_share) or j < scarce_reviewers,
            )
        )

    papers: list[Paper] = []
    author_pool = people[n_reviewers:]
    for i in range(n_papers):
        if i < scarce_papers:
            own = [scarce_topic]
        else:
            own = list(rng.choice(common, size=int(rng.integers(1, 3)), replace=False))
        authors: list[str] = []
        insts: list[str] = []
        for _ in range(int(rng.integers(2, 5))):
            inst, domain = institutions[int(rng.integers(len(institutions)))]
            if rng.random() < 0.06:
                author = reviewers[int(rng.integers(n_reviewers))]
                authors.append(author.email)
                insts.append(author.institution)
            else:
                authors.append(_email(author_pool[int(rng.integers(len(author_pool)))], domain))
                insts.append(inst)
        words = rng.choice(title_words, size=2, replace=False) if title_words else ()
        subject = _SUBJECTS[int(rng.integers(len(_SUBJECTS)))]
        title = f"{' '.join(words).capitalize()} {subject} for {own[0]}" if len(words) else own[0]
        papers.append(
            Paper(
                id=f"{id_prefix}{i + 1:04d}",
                title=title,
                topics=own,
                authors=sorted(set(authors)),
                institutions=sorted(set(insts)),
            )
        )

    rev_topics = [set(r.topics) for r in reviewers]
    r_idx: list[int] = []
    p_idx: list[int] = []
    values: list[float] = []
    for i, paper in enumerate(papers):
        wanted = set(paper.topics)
        overlap = np.array([len(wanted & t) for t in rev_topics], dtype=float)
        if i < scarce_papers:
            pool = np.flatnonzero(overlap > 0)
        elif candidates is None:
            pool = np.arange(n_reviewers)
        else:
            near = np.flatnonzero(overlap > 0)
            near = near[near >= scarce_reviewers]
            far = rng.choice(
                np.arange(scarce_reviewers, n_reviewers), size=candidates, replace=False
            )
            pool = np.union1d(near, far)
        fit = 0.35 * overlap[pool] + rng.uniform(0.0, 0.6, size=len(pool))
        r_idx.extend(pool.tolist())
        p_idx.extend([i] * len(pool))
        values.extend(np.round(np.clip(fit, 0.0, 1.0), 2).tolist())

    conflicts: list[DeclaredConflict] = []
    seen: set[tuple[int, int]] = set()
    while len(conflicts) < declared:
        pair = (int(rng.integers(n_reviewers)), int(rng.integers(n_papers)))
        if pair not in seen:
            seen.add(pair)
            reason = ("recent co-author", "advisor or advisee", "close personal tie")[len(seen) % 3]
            conflicts.append(
                DeclaredConflict(
                    reviewer=reviewers[pair[0]].id, paper=papers[pair[1]].id, reason=reason
                )
            )

    session = Session(
        name=name,
        kind=kind,
        policy=policy,
        papers=papers,
        reviewers=reviewers,
        conflicts=conflicts,
        scores=ScoreTable.from_arrays(
            np.array(r_idx, dtype=np.int32), np.array(p_idx, dtype=np.int32), np.array(values)
        ),
    )
    return _with_signals(session, topics, np.random.default_rng(seed + 1)) if signals else session


_METHOD_WORDS = (
    "bayesian kalman spectral wavelet ensemble lagrangian finite-volume particle regression "
    "clustering variational sparse-coding hierarchical stochastic adjoint multigrid "
    "reinforcement graph-based causal bootstrap"
).split()
_TOPIC_JARGON = (
    "hydrophone turbidity bathymetry salinity swell estuary plume transect mooring drifter "
    "backscatter altimeter geoid radiometer tidal harmonic surge gauge thermistor biofouling "
    "acidity sediment-flux dune ripple glider thruster tether sonar beamforming echosounder "
    "reanalysis innovation covariance assimilation drift offset linearity hysteresis "
    "permafrost aquifer runoff stormwater mycorrhiza nitrogen carbonate alkalinity moraine "
    "crevasse firn albedo heatwave resilience retrofit greywater isotope"
).split()
_ABSTRACT = (
    "We study {a} and {b} for {topic}. Using {m1} methods with {c}, we show how {d} "
    "improves {topic2} in field trials. Our {m2} analysis covers {e} and {a}."
)
_PROFILE = "Work on {topic} with {m1} methods: {a}, {b}, {c}. Also {topic2}, {d} and {m2} analysis."


def _with_signals(session: Session, topics: list[str], rng: np.random.Generator) -> Session:
    """The session with invented abstracts, profiles, keywords and bids, scored by the recipe."""
    from review_alloc.plan.recipe import recipe_scores

    jargon = {t: list(rng.choice(_TOPIC_JARGON, size=6, replace=False)) for t in topics}

    def words(own: list[str], count: int) -> list[str]:
        pool = [w for t in own for w in jargon[t]]
        return [str(w) for w in rng.choice(pool, size=count)]

    papers = []
    for paper in session.papers:
        a, b, c, d, e = words(paper.topics, 5)
        m1, m2 = (str(m) for m in rng.choice(_METHOD_WORDS, size=2, replace=False))
        topic2 = paper.topics[-1]
        abstract = _ABSTRACT.format(
            a=a, b=b, c=c, d=d, e=e, m1=m1, m2=m2, topic=paper.topics[0], topic2=topic2
        )
        papers.append(paper.model_copy(update={"abstract": abstract, "keywords": [a, m1]}))
    reviewers = []
    for reviewer in session.reviewers:
        a, b, c, d = words(reviewer.topics, 4)
        m1, m2 = (str(m) for m in rng.choice(_METHOD_WORDS, size=2, replace=False))
        profile = _PROFILE.format(
            a=a, b=b, c=c, d=d, m1=m1, m2=m2, topic=reviewer.topics[0], topic2=reviewer.topics[-1]
        )
        reviewers.append(reviewer.model_copy(update={"profile": profile, "keywords": [b]}))
    # Each reviewer bids on a few papers: keen on some of their topics, against one or two.
    r_idx: list[int] = []
    p_idx: list[int] = []
    levels: list[float] = []
    levels_of = [BID_LEVELS[w] for w in ("eager", "willing", "neutral", "reluctant")]
    for j, reviewer in enumerate(reviewers):
        mine = set(reviewer.topics)
        near = [i for i, p in enumerate(papers) if mine & set(p.topics)]
        chosen = rng.choice(near, size=min(3, len(near)), replace=False) if near else []
        against = rng.choice(len(papers), size=2, replace=False)
        bids = {int(i): float(rng.choice(levels_of)) for i in chosen}
        bids.update({int(i): float(BID_LEVELS["against"]) for i in against if int(i) not in bids})
        for i, level in sorted(bids.items()):
            r_idx.append(j)
            p_idx.append(i)
            levels.append(level)
    signals = Signals(
        expertise=session.scores,
        bids=ScoreTable.from_arrays(
            np.array(r_idx, dtype=np.int32), np.array(p_idx, dtype=np.int32), np.array(levels)
        ),
    )
    recipe = ScoreRecipe()
    with_texts = session.model_copy(update={"papers": papers, "reviewers": reviewers})
    return with_texts.model_copy(
        update={
            "policy": session.policy.model_copy(update={"recipe": recipe}),
            "signals": signals,
            "scores": recipe_scores(with_texts, recipe, signals),
        }
    )


_SUBJECTS = (
    "estimators",
    "pipelines",
    "scheduling",
    "models",
    "protocols",
    "benchmarks",
    "indexes",
    "controllers",
    "representations",
    "solvers",
)
_WORDS = (
    "adaptive sparse robust online streaming distributed calibrated low-power federated "
    "probabilistic incremental scalable certified lightweight"
).split()


WORKSHOP_SOURCES = (
    "review_alloc.samples",
    "review_alloc.plan.recipe",
    "review_alloc.plan.similarity",
    "review_alloc.plan.rules",
    "review_alloc.model.scores",
    "review_alloc.model.session",
    "review_alloc.model.signals",
    "review_alloc.model.storage",
)
"""The modules whose code makes the demo workshop's document (its people, scores and format)."""


def workshop_key() -> str:
    """A digest that changes whenever the built-in demo workshop may: the code that makes it
    and the versions of the libraries behind its scores. Cheap (no module is imported, no
    sample is built), so the user's demo copy can be checked on every start."""
    import hashlib
    from importlib.metadata import version
    from importlib.util import find_spec
    from pathlib import Path

    digest = hashlib.sha256()
    for name in WORKSHOP_SOURCES:
        spec = find_spec(name)
        origin = spec.origin if spec is not None else None
        digest.update(name.encode())
        digest.update(Path(origin).read_bytes() if origin else b"missing")
    for package in ("scikit-learn", "scipy", "numpy"):
        digest.update(f"{package} {version(package)}".encode())
    return digest.hexdigest()


def workshop() -> Session:
    """A 40-paper workshop with 24 reviewers, every pair scored."""
    topics = [
        "acoustic sensing",
        "buoy networks",
        "sediment models",
        "tide forecasting",
        "underwater robotics",
        "satellite altimetry",
        "data assimilation",
        "sensor calibration",
    ]
    return _build(
        name="Harbourlight Workshop on Coastal Sensing 2027",
        kind="conference",
        seed=20270,
        topics=topics,
        n_papers=40,
        n_reviewers=24,
        n_institutions=14,
        policy=Policy(reviews=3, min_reviews=2, cap=6, floor=2),
        caps=(5, 7),
        senior_share=0.4,
        candidates=None,
        declared=6,
        title_words=tuple(_WORDS),
        id_prefix="W",
        signals=True,
    )


def conference() -> Session:
    """A ~1,500-paper conference with ~700 reviewers; 'hardware verification' is under-supplied.

    Its policy asks for a senior reviewer on every paper, at most one reviewer per institution
    on a paper, and up to five leads per reviewer.
    """
    topics = [
        "graph algorithms",
        "compilers",
        "databases",
        "distributed systems",
        "computer vision",
        "speech",
        "robotics",
        "security",
        "cryptography",
        "networking",
        "operating systems",
        "program analysis",
        "machine learning theory",
        "optimisation",
        "information retrieval",
        "human-computer interaction",
        "computational biology",
        "scientific computing",
        "energy systems",
        "formal methods",
        "quantum computing",
        "education",
        "visualisation",
        "hardware verification",
    ]
    return _build(
        name="Northmere Conference on Applied Computation 2027",
        kind="conference",
        seed=20271,
        topics=topics,
        n_papers=1500,
        n_reviewers=700,
        n_institutions=160,
        policy=Policy(
            reviews=3,
            min_reviews=2,
            cap=7,
            unscored="exclude",
            senior_min=1,
            max_per_institution=1,
            max_leads=5,
        ),
        caps=(6, 8),
        senior_share=0.4,
        candidates=20,
        scarce=("hardware verification", 24, 5),
        declared=300,
        title_words=tuple(_WORDS),
    )


def panel() -> Session:
    """A 60-proposal grant panel with 18 assessors and strict conflict rules."""
    topics = ["soil ecology", "marine chemistry", "climate adaptation", "urban water", "glaciology"]
    return _build(
        name="Vellmar Foundation Early-Career Fellowships 2027",
        kind="panel",
        seed=20272,
        topics=topics,
        n_papers=60,
        n_reviewers=18,
        n_institutions=9,
        policy=Policy(
            reviews=3,
            min_reviews=3,
            cap=12,
            conflict_rules=ConflictRules(author_email=True, institution=True, email_domain=True),
        ),
        caps=(10, 12),
        senior_share=0.6,
        candidates=None,
        declared=20,
        title_words=tuple(_WORDS),
        id_prefix="G",
        signals=True,
    )


SAMPLES: dict[str, Callable[[], Session]] = {
    "workshop": workshop,
    "conference": conference,
    "panel": panel,
}
"""The shipped demo sessions by file stem; `workshop` is the built-in demo."""
