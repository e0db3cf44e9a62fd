"""The package layout keeps its promises (DEVELOPERS.md, "Layout").

Each subpackage of ``cwlimits`` is a stage of the pipeline with a public face; what stages
share lives in the documented internal modules at the top (``cwlimits._units``,
``cwlimits._files`` ...).  These checks read the source with :mod:`ast` (no import), so
they see imports inside functions too.
"""

import ast
import pathlib

import pytest

PACKAGE = pathlib.Path(__file__).resolve().parent.parent / "cwlimits"


def _modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        if parts[-1] == "__init__":
            parts = parts[:-1]
        yield path, parts


def _stage(parts):
    """The subpackage (stage) a dotted module path belongs to; '' for top-level modules."""
    if len(parts) < 2:
        return ""
    return parts[1] if (PACKAGE / parts[1]).is_dir() else ""


def _imports(path):
    """(module parts, imported name or None) of every ``cwlimits`` import in a file."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            parts = tuple(node.module.split("."))
            if parts[0] == "cwlimits":
                for alias in node.names:
                    yield parts, alias.name, node.lineno
        elif isinstance(node, ast.Import):
            for alias in node.names:
                parts = tuple(alias.name.split("."))
                if parts[0] == "cwlimits":
                    yield parts, None, node.lineno


def _is_private(name):
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def test_no_relative_imports():
    # one spelling of every import, so that a module's dependencies can be grepped
    # (common practice)
    found = []
    for path, _ in _modules():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        found += [f"{path.name}:{n.lineno}" for n in ast.walk(tree)
                  if isinstance(n, ast.ImportFrom) and n.level > 0
                  and path.name != "__init__.py"]
    assert not found


def test_no_private_name_crosses_a_stage():
    # DEVELOPERS.md: a name starting with "_" is never imported across a subpackage
    # boundary; shared helpers are public names of a documented module.
    crossings = []
    for path, parts in _modules():
        here = _stage(parts)
        for target, name, line in _imports(path):
            there = _stage(target)
            if there == here or there == "":
                continue  # the same stage, or a documented top-level module
            private_module = any(_is_private(p) for p in target[2:])
            if private_module or (name is not None and _is_private(name)):
                crossings.append(f"{path.relative_to(PACKAGE)}:{line} "
                                 f"{'.'.join(target)} {name or ''}".strip())
    assert not crossings, "\n".join(crossings)


@pytest.mark.parametrize("stage", sorted(p.name for p in PACKAGE.iterdir()
                                         if p.is_dir() and (p / "__init__.py").exists()))
def test_every_stage_has_a_public_face(stage):
    # STYLE.md section 2: every module declares __all__; the stage's __init__ says what
    # it holds in its docstring
    tree = ast.parse((PACKAGE / stage / "__init__.py").read_text(encoding="utf-8"))
    doc = ast.get_docstring(tree)
    assert doc and "see DEVELOPERS.md" not in doc and len(doc.split()) >= 12
    names = {t.id for n in tree.body if isinstance(n, ast.Assign) for t in n.targets
             if isinstance(t, ast.Name)}
    assert "__all__" in names


def test_only_plotting_imports_matplotlib_and_nobody_picks_a_backend():
    # STYLE.md section 1 and issue 15: plotting/ is the one matplotlib user; the library
    # never switches a notebook's backend or changes the global style
    found = []
    for path, parts in _modules():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = ([a.name for a in node.names] if isinstance(node, ast.Import) else
                     [node.module or ""] if isinstance(node, ast.ImportFrom) else [])
            if any(n.split(".")[0] == "matplotlib" for n in names) and _stage(parts) != "plotting":
                found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} imports matplotlib")
            if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                    and node.func.attr == "use" and isinstance(node.func.value, ast.Name)
                    and node.func.value.id == "matplotlib"):
                found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} matplotlib.use")
    assert not found, "\n".join(found)
