"""Seed a demonstration project: the community-orchard sample study with a simulated judge panel.

:func:`build_demo` creates a project folder (marked with a ``.labelstudy-demo`` file), imports the
sample solution, composes round 1 with all six task kinds, opens it, invites the twelve simulated judges
of :func:`labelstudy.simulate.orchard_panel` and stores the answers of ten of them (revision 1, then
submitted), so that two judges are still to answer. Running it again on a folder it made starts over;
any other folder that is not empty is refused and left untouched.
"""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from pathlib import Path

from labelstudy.errors import ProjectError
from labelstudy.links import judge_url, status_words
from labelstudy.project import SECRET_NAME, init_project
from labelstudy.simulate import ORCHARD_CANDIDATES, orchard_panel
from labelstudy.store import DB_NAME
from labelstudy.tasks import build_view, check_answer

__all__ = ["DEMO_MARKER", "DemoLink", "DemoProject", "build_demo", "prepare_folder", "sample_solution_path",
           "DEMO_TASKS", "PENDING_JUDGES", "ROUND_SEED"]

DEMO_MARKER = ".labelstudy-demo"
MARKER_TEXT = ("This folder was made by `labelstudy demo`. Running that command again on this folder\n"
               "deletes everything in it and builds the demonstration afresh.\n")
SOLUTION_NAME = "orchard_solution.xlsx"
STUDY_TITLE = "Why people volunteer in community orchards (demonstration)"
ROUND_SEED = 2026
PENDING_JUDGES = ("J11", "J12")    # invited, not started
MAX_PILES = 8
DEMO_TASKS = (
    ("open_sort", {"max_piles": MAX_PILES}),
    ("label_match", {"show": "both", "none_option": True, "shuffle_options": True}),
    ("relevance", {}),
    ("essentiality", {}),
    ("definition_fit", {"shuffle_options": True}),
    ("naming", {"candidates": ORCHARD_CANDIDATES}),
)
INSTRUCTIONS = (
    "Thank you for helping us. A survey of 412 community-orchard volunteers asked why they give their "
    "time; a factor analysis grouped the twenty statements into four motives. We would like to know "
    "whether the names and definitions we gave those motives say what the statements say.\n\n"
    "There are six short tasks. First you group the statements in your own way, before you see our "
    "names. Then you place each statement under one of our motives, rate how well it fits, and finally "
    "suggest names. There are no right or wrong answers: your first reading is what we need. Every "
    "answer is saved as you go, so you can stop and come back through the same link.")
CONSENT = (
    "Your answers are used only to improve the names and definitions of this questionnaire. We store "
    "the name or code you were invited under, your answers, any comments and how long each answer "
    "took; nothing else. Results are reported for the panel as a whole, never with your name. You may "
    "stop at any time, and you may ask us to delete your answers until the study is reported.")


@dataclass(frozen=True)
class DemoLink:
    """One judge's personal link as listed after seeding."""

    code: str
    name: str
    expertise: str
    status: str
    link: str
    pending: bool


@dataclass(frozen=True)
class DemoProject:
    """What :func:`build_demo` made; ``links`` lists the pending judges first."""

    path: Path
    password: str
    study_id: int
    round_id: int
    researcher_url: str
    links: tuple[DemoLink, ...]
    recreated: bool
    n_items: int
    n_factors: int


def sample_solution_path() -> Path:
    """The sample solution workbook: the checkout's ``sample_studies`` copy, else the packaged one."""
    here = Path(__file__).resolve().parent
    checkout = here.parent / "sample_studies" / "community_orchards" / "solution" / SOLUTION_NAME
    if checkout.is_file():
        return checkout
    packaged = here / "defaults" / SOLUTION_NAME
    if packaged.is_file():
        return packaged
    raise ProjectError(f"the sample solution {SOLUTION_NAME} is missing from this installation "
                       f"(looked in {checkout.parent} and {packaged.parent})")


def prepare_folder(path: str | Path) -> bool:
    """Make ``path`` ready for a fresh demo; returns True when an earlier demo was removed.

    A folder holding the ``.labelstudy-demo`` marker is deleted and recreated. A missing or empty folder
    is used as it is. Anything else (a real project, or any other files) is refused with ProjectError and
    left exactly as it was.
    """
    p = Path(path)
    if p.is_symlink():
        raise ProjectError(f"{p} is a symbolic link; give the demo a plain folder. Nothing was changed.")
    if not p.exists():
        return False
    if not p.is_dir():
        raise ProjectError(f"{p} is a file, not a folder; choose another --dir. Nothing was changed.")
    marker = p / DEMO_MARKER
    if marker.is_file() and not marker.is_symlink():
        shutil.rmtree(p)
        return True
    if (p / DB_NAME).exists() or (p / SECRET_NAME).exists():
        raise ProjectError(f"{p} holds a labelstudy project that `labelstudy demo` did not create; the "
                           "demo never touches a real project. Choose another --dir. Nothing was changed.")
    if any(p.iterdir()):
        raise ProjectError(f"{p} is not empty and was not made by `labelstudy demo`; choose an empty or "
                           "new folder with --dir. Nothing was changed.")
    return False


def build_demo(path: str | Path, *, base_url: str = "http://127.0.0.1:8150",
               password: str | None = None) -> DemoProject:
    """Create the demonstration project at ``path`` (see the module docstring).

    Raises
    ------
    ProjectError
        When ``path`` is a project or a non-empty folder not made by this function.
    """
    from labelstudy.solution import load_solution

    p = Path(path)
    recreated = prepare_folder(p)
    project, password = init_project(p, password=password)
    (p / DEMO_MARKER).write_text(MARKER_TEXT, encoding="utf-8")
    store = project.store()
    try:
        solution = load_solution(sample_solution_path())
        sid = store.create_study(STUDY_TITLE, solution)
        rid = store.create_round(sid, tasks=list(DEMO_TASKS), title="Round 1: first reading",
                                 instructions=INSTRUCTIONS, consent=CONSENT, seed=ROUND_SEED)
        store.open_round(rid)
        rnd = store.get_round(rid)
        shown = store.round_solution(rid)
        tasks = {t["kind"]: t for t in store.tasks(rid)}
        panel = orchard_panel(shown, max_piles=MAX_PILES)
        by_judge = {code: frame for code, frame in panel.answers.groupby("judge", sort=False)}
        judge_ids = {}
        for prof in panel.judges:
            inv = store.add_judge(rid, prof.display_name, expertise=prof.expertise)
            judge_ids[prof.code] = inv["judge_id"]
        for prof in panel.judges:
            if prof.code in PENDING_JUDGES:
                continue
            jid = judge_ids[prof.code]
            views = {kind: build_view(t, shown, seed=rnd["seed"], judge_id=jid) for kind, t in tasks.items()}
            batch = []
            for row in by_judge[prof.code].itertuples(index=False):
                value, comment = check_answer(views[row.task_kind], row.key, row.value, row.comment)
                batch.append((tasks[row.task_kind]["id"], row.key, value, comment, 1, float(row.seconds)))
            store.record_consent(jid, rid)
            store.save_answers(jid, rid, batch)
            store.submit(jid, rid)
        store.log_event("demo_seeded", study_id=sid, round_id=rid)
        codes = {judge_ids[j.code]: j for j in panel.judges}
        links = []
        for inv in store.invitations(rid):
            prof = codes[inv["judge_id"]]
            links.append(DemoLink(prof.code, inv["display_name"], inv["expertise"], status_words(inv),
                                  judge_url(base_url, inv["token"]), prof.code in PENDING_JUDGES))
        links.sort(key=lambda link: not link.pending)   # stable: pending first, then panel order
        return DemoProject(path=p, password=password, study_id=sid, round_id=rid,
                           researcher_url=f"{base_url.rstrip('/')}/r/", links=tuple(links),
                           recreated=recreated, n_items=len(shown.items), n_factors=len(shown.factors))
    finally:
        store.close()
