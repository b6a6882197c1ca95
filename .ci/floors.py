"""Print pip constraints that pin dependencies of pyproject.toml to their declared floors.

    python .ci/floors.py pyproject.toml > floors.txt             # the package and its test extra
    pip install -c floors.txt -e ".[test]"
    python .ci/floors.py pyproject.toml --extras                 # the other extras, one per line
    python .ci/floors.py pyproject.toml --extra sweep > sweep.txt  # one extra's own floors
    pip install -c sweep.txt -e ".[test,sweep]"

The floors are stated once, in pyproject.toml (``name>=version``); this turns each into
``name==version`` for the run that checks tricharge really works with them. Every
dependency of the package and of each extra must have a floor, and a package named in
several lists must have the same floor in all of them. A reference to tricharge's own
extras (``tricharge[viz]``) is followed, not pinned. The other extras are checked one at a
time on top of the first set, with only their own packages pinned: an extra's library may
need a newer release of a core dependency than the core's floor (dask 2024.8 needs
click 8.1), and pip then installs one. Only the standard library is used, so it runs
before anything is installed.
"""

from __future__ import annotations

import re
import sys
import tomllib
from pathlib import Path

REQUIREMENT = re.compile(r"^\s*([A-Za-z0-9][A-Za-z0-9._-]*)\s*(\[[^\]]*\])?\s*(.*?)\s*(;.*)?$")
FLOOR = re.compile(r"^>=\s*([0-9][0-9A-Za-z.+!-]*)$")


def canonical(name: str) -> str:
    return re.sub(r"[-_.]+", "-", name).lower()


def floors(project: dict) -> dict[str, str]:
    """{package: floor version} over the dependencies and every optional dependency."""
    own = canonical(project["name"])
    lists = {"dependencies": project.get("dependencies", [])}
    lists |= {f"extra {k}": v for k, v in project.get("optional-dependencies", {}).items()}
    found: dict[str, str] = {}
    problems = []
    for where, requirements in lists.items():
        for text in requirements:
            match = REQUIREMENT.match(text)
            if not match:
                problems.append(f"{where}: cannot read {text!r}")
                continue
            name, _, specifiers, _ = match.groups()
            if canonical(name) == own:
                continue
            floor = [FLOOR.match(s.strip()) for s in specifiers.split(",") if s.strip().startswith(">=")]
            if len(floor) != 1 or floor[0] is None:
                problems.append(f"{where}: {text!r} has no single floor (name>=version)")
                continue
            version = floor[0].group(1)
            if found.setdefault(canonical(name), version) != version:
                problems.append(f"{where}: {name} floor {version} differs from {found[canonical(name)]} elsewhere")
    if problems:
        raise SystemExit("floors.py: " + "; ".join(problems))
    return found


def reachable(project: dict, extra: str) -> set[str]:
    """The extras ``extra`` pulls in through references to the package itself, with it."""
    own = canonical(project["name"])
    extras = project.get("optional-dependencies", {})
    seen, todo = set(), [extra]
    while todo:
        name = todo.pop()
        if name in seen or name not in extras:
            continue
        seen.add(name)
        for text in extras[name]:
            match = REQUIREMENT.match(text)
            if match and canonical(match.group(1)) == own and match.group(2):
                todo += [e.strip() for e in match.group(2)[1:-1].split(",")]
    return seen


def main(argv: list[str]) -> None:
    args = argv[1:]
    path = Path(args[0] if args and not args[0].startswith("--") else "pyproject.toml")
    project = tomllib.loads(path.read_text())["project"]
    every = floors(project)  # checks every list
    extras = project.get("optional-dependencies", {})
    base = reachable(project, "test")
    if "--extras" in args:
        print("\n".join(sorted(set(extras) - base)))
        return
    if "--extra" in args:
        chosen = {args[args.index("--extra") + 1]}
        lists = [extras[e] for e in chosen]
    else:
        lists = [project.get("dependencies", [])] + [extras[e] for e in sorted(base)]
    names = {canonical(m.group(1)) for texts in lists for t in texts if (m := REQUIREMENT.match(t))}
    print(f"# Exact floors from {path.name}, written by .ci/floors.py {' '.join(args[1:])}".rstrip())
    for name, version in sorted(every.items()):
        if name in names:
            print(f"{name}=={version}")


if __name__ == "__main__":
    main(sys.argv)
