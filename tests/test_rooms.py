"""The package's rooms and the direction of their imports (DEVELOPERS.md, "Rooms").

Each sub-package of ``matcher`` is a stage of the job; a module may import from
its own room and from rooms below it, never from a room above. The few
call-time imports that go upward are listed here, each with its reason, so a
new one fails this test until it is argued for. Also: at most a dozen loose
modules at the top, and no database session outside ``matcher/store``.
"""

from __future__ import annotations

import ast
from pathlib import Path

PKG = Path(__file__).resolve().parents[1] / "matcher"

#: Rooms from the bottom up; the top-level modules named here are the base every room may use.
LEVELS: list[set[str]] = [
    {"errors", "limits", "rules", "classes", "safe_text", "location", "results"},
    {"chem"},
    {"io"},
    {"retention"},
    {"signal"},
    {"store"},
    {"identify"},
    {"curate"},
    {"report"},
    {"review"},
    {"api", "demo", "__init__"},
    {"cli", "__main__"},
]

#: Upward imports made at call time inside a function, each with its reason.
ALLOWED_UPWARD: dict[tuple[str, str], str] = {
    ("results", "report"): "a ScreenResult writes itself (to_csv, to_html ...) through the writers, imported when called",
}


def _room(path: Path) -> str:
    rel = path.relative_to(PKG)
    return rel.parts[0] if len(rel.parts) > 1 else rel.stem


def _level(room: str) -> int:
    for k, rooms in enumerate(LEVELS):
        if room in rooms:
            return k
    raise AssertionError(f"room {room!r} is not placed in LEVELS (tests/test_rooms.py); place it")


def _imports(path: Path):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0 and node.module.startswith("matcher"):
            names = [node.module] if node.module != "matcher" else [f"matcher.{a.name}" for a in node.names]
            for n in names:
                yield node.lineno, n
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("matcher"):
                    yield node.lineno, a.name


def _target_room(module: str) -> str | None:
    parts = module.split(".")
    if len(parts) == 1:
        return "__init__"
    if (PKG / parts[1]).is_dir() or (PKG / f"{parts[1]}.py").exists():
        return parts[1]
    return None  # matcher.shipped, matcher.schemas, matcher.examples: data


def test_imports_run_downward_between_rooms():
    upward, used = [], set()
    for path in sorted(PKG.rglob("*.py")):
        room = _room(path)
        for line, module in _imports(path):
            target = _target_room(module)
            if target is None or target == room:
                continue
            if _level(target) > _level(room) and (room, target) in ALLOWED_UPWARD:
                used.add((room, target))
            elif _level(target) > _level(room):
                upward.append(f"{path.relative_to(PKG.parent)}:{line} imports {module} ({room} -> {target})")
    assert not upward, "imports that run upward:\n" + "\n".join(upward)
    assert used == set(ALLOWED_UPWARD), f"allowed but no longer used (remove them): {set(ALLOWED_UPWARD) - used}"


def test_at_most_twelve_loose_modules_at_the_top():
    loose = sorted(p.name for p in PKG.glob("*.py"))
    assert len(loose) <= 12, loose


def test_no_database_session_outside_the_store():
    offenders = []
    for path in PKG.rglob("*.py"):
        if _room(path) == "store":
            continue
        text = path.read_text(encoding="utf-8")
        for word in ("import sqlalchemy", "from sqlalchemy", "Session(", "run_write(", ".execute("):
            if word in text:
                offenders.append(f"{path.relative_to(PKG.parent)}: {word}")
    assert not offenders, offenders


def test_no_file_cites_a_design_document_the_repository_lacks():
    root = PKG.parent
    cited = []
    for path in list(root.glob("*.md")) + list((root / "docs").glob("*.md")) + list(PKG.rglob("*.py")) \
            + list((root / "tests").rglob("*.py")):
        if path.name == "test_rooms.py":
            continue
        text = path.read_text(encoding="utf-8")
        for needle in ("DESIGN" + ".md", ".." + "/shared"):  # spelled in two parts so this file does not cite them
            if needle in text:
                cited.append(f"{path.relative_to(root)} cites {needle}")
    assert not cited, cited
