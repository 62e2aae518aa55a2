"""The documentation in docs/ keeps up with the code.

Cheap checks that fail when a key is added to a reader or to a verb's JSON without being
documented, when a link between the pages breaks, or when a worked example stops loading.  The
keys are taken from the program's own behaviour (the "allowed keys" its readers list when given
an unknown one, the JSON the command prints), not from private tables, so the checks follow the
code wherever it moves.
"""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path

import pytest

from workbench.errors import MachineFileError, PlanFileError, RunFileError

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
SAMPLES = ROOT / "sample_runs"
MACHINE = SAMPLES / "agitator_drive.toml"
PLAN = SAMPLES / "runup_plan.toml"
RUN = SAMPLES / "agitator_runup.wav"

_UNKNOWN = "zz_not_a_key"


def _doc(name: str) -> str:
    return (DOCS / name).read_text(encoding="utf-8")


def _section(text: str, marker: str) -> str:
    """The section whose heading contains ``marker``, up to the next heading of its level or
    above."""
    lines = text.splitlines()
    for i, line in enumerate(lines):
        m = re.match(r"(#+) ", line)
        if m and marker in line:
            level = len(m.group(1))
            body = []
            for nxt in lines[i + 1:]:
                h = re.match(r"(#+) ", nxt)
                if h and len(h.group(1)) <= level:
                    break
                body.append(nxt)
            return "\n".join(body)
    raise AssertionError(f"no heading containing {marker!r}")


def _row(key: str) -> str:
    """How a key opens its row in a reference table of the docs."""
    return f"| `{key}` |"


def _allowed(message: str, lead: str) -> list[str]:
    """The comma-separated names after ``lead`` in an error message."""
    tail = message.split(lead, 1)[1]
    return [k.strip() for k in tail.split(",") if k.strip()]


# ------------------------------------------------------------------------------------------
# machine file
# ------------------------------------------------------------------------------------------
def _machine_tables() -> list[str]:
    from workbench.machine import machine_from_dict

    with pytest.raises(MachineFileError) as err:
        machine_from_dict({_UNKNOWN: {}})
    names = _allowed(str(err.value), "allowed tables are ")
    return [n.strip("[]") for n in names]


def _machine_keys(table: str) -> list[str]:
    from workbench.machine import machine_from_dict

    d = {"machine": {"name": "m", "reference": "a"}, "shaft": [{"name": "a"}]}
    if table == "machine":
        d["machine"][_UNKNOWN] = 1
    else:
        d.setdefault(table, []).append({"name": "x", _UNKNOWN: 1})
    with pytest.raises(MachineFileError) as err:
        machine_from_dict(d)
    return _allowed(str(err.value), "allowed keys are ")


def test_every_machine_table_and_key_is_documented():
    text = _doc("machine-file.md")
    tables = _machine_tables()
    assert "machine" in tables and "bearing" in tables   # the message was read right
    for table in tables:
        marker = "`[machine]`" if table == "machine" else f"`[[{table}]]`"
        section = _section(text, marker)
        keys = _machine_keys(table)
        assert "name" in keys
        missing = [k for k in keys if _row(k) not in section]
        assert not missing, f"docs/machine-file.md, {marker}: keys not documented: {missing}"


# ------------------------------------------------------------------------------------------
# plan file
# ------------------------------------------------------------------------------------------
def _plan_base() -> dict:
    return {"speed": {"profile": "linear", "start_rpm": 300, "end_rpm": 1800, "duration_s": 60},
            "acquisition": {"rates_hz": [2560]}}


def _plan_keys(section: str) -> list[str]:
    from workbench.sampling import plan_from_dict

    d = _plan_base()
    if section in ("band", "limit"):
        d[section] = [{"name": "x", _UNKNOWN: 1}]
    else:
        d.setdefault(section, {})[_UNKNOWN] = 1
    with pytest.raises(PlanFileError) as err:
        plan_from_dict(d)
    return _allowed(str(err.value), "allowed keys are ")


@pytest.mark.parametrize("section, marker", [
    ("speed", "`[speed]`"), ("acquisition", "`[acquisition]`"), ("band", "`[[band]]`"),
    ("resampling", "`[resampling]`"), ("limit", "`[[limit]]`"),
])
def test_every_plan_key_is_documented(section, marker):
    text = _section(_doc("plan-file.md"), marker)
    keys = _plan_keys(section)
    assert keys, "the plan reader listed no allowed keys"
    missing = [k for k in keys if _row(k) not in text]
    assert not missing, f"docs/plan-file.md, {marker}: keys not documented: {missing}"


def test_every_filter_and_profile_kind_is_documented():
    from workbench.sampling import plan_from_dict

    text = _doc("plan-file.md")
    for key, example in (("filter", "acquisition"), ("profile", "speed")):
        d = _plan_base()
        d[example][key] = _UNKNOWN
        with pytest.raises(PlanFileError) as err:
            plan_from_dict(d)
        kinds = re.findall(r"'?([a-z0-9]+)'?", str(err.value).split("must be one of ", 1)[1]
                           .split(";", 1)[0])
        assert len(kinds) >= 3
        missing = [k for k in kinds if f"`{k}`" not in text and f'"{k}"' not in text]
        assert not missing, f"docs/plan-file.md: {key} kinds not documented: {missing}"


# ------------------------------------------------------------------------------------------
# sidecar
# ------------------------------------------------------------------------------------------
def _sidecar_keys(tmp_path, d: dict) -> list[str]:
    from workbench.runs import read_sidecar

    path = tmp_path / "run.json"
    path.write_text(json.dumps(d), encoding="utf-8")
    with pytest.raises(RunFileError) as err:
        read_sidecar(path)
    return _allowed(str(err.value), "allowed: ")


def test_every_sidecar_key_is_documented(tmp_path):
    text = _doc("run-files.md")
    top = _sidecar_keys(tmp_path, {_UNKNOWN: 1})
    channel = _sidecar_keys(tmp_path, {"channels": [{"name": "a", _UNKNOWN: 1}]})
    assert "rate_hz" in top and "sensitivity" in channel
    top_section = _section(text, "Top-level keys")
    channel_section = _section(text, "Channel entries")
    missing = [k for k in top if _row(k) not in top_section]
    missing += [f"channels[].{k}" for k in channel if _row(k) not in channel_section]
    assert not missing, f"docs/run-files.md: sidecar keys not documented: {missing}"


# ------------------------------------------------------------------------------------------
# JSON of the command
# ------------------------------------------------------------------------------------------
def _json_of(argv, capsys) -> dict:
    from workbench.cli.main import main

    assert main(argv) == 0
    return json.loads(capsys.readouterr().out)


def _keys(obj, skip=()) -> set[str]:
    """Every key of ``obj``, of its objects and of the objects in its arrays."""
    out = set()
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.add(k)
            if k not in skip:
                out |= _keys(v, skip)
    elif isinstance(obj, list):
        for v in obj:
            out |= _keys(v, skip)
    return out


def _undocumented(verb: str, obj: dict, skip=()) -> list[str]:
    section = _section(_doc("cli-json.md"), f"## {verb}")
    return sorted(k for k in _keys(obj, skip) if f"`{k}`" not in section
                  and not re.search(rf"`[a-z_\[\]]*\.{re.escape(k)}`", section)
                  and not re.search(rf",\s*`?{re.escape(k)}`", section))


def test_track_json_keys_are_documented(capsys):
    obj = _json_of(["track", str(RUN), "--json", "--machine", str(MACHINE), "--plan", str(PLAN),
                    "--envelope", "400,1000", "--overall-band", "10,500", "--amplitude", "rms"],
                   capsys)
    # the optional keys asked for are there, so the check covers them
    for key in ("envelope_peaks", "identified", "overall", "valid_region", "scaling", "limits"):
        assert key in obj
    assert not _undocumented("track", obj)


def test_plan_side_json_keys_are_documented(capsys):
    cases = {
        "alias": ["alias", "5000", "9000", "--rate", "12800", "--plan", str(PLAN), "--json"],
        "orders": ["orders", str(MACHINE), "--json"],
        "foldmap": ["foldmap", str(MACHINE), str(PLAN), "--rate", "2560", "--json"],
        "plan": ["plan", str(MACHINE), str(PLAN), "--json"],
    }
    for verb, argv in cases.items():
        obj = _json_of(argv, capsys)
        assert obj
        missing = _undocumented(verb, obj)
        assert not missing, f"docs/cli-json.md, {verb}: keys not documented: {missing}"


# ------------------------------------------------------------------------------------------
# links, examples, pointers
# ------------------------------------------------------------------------------------------
def _slug(heading: str) -> str:
    """The anchor a Markdown renderer gives a heading (lower case, punctuation dropped,
    spaces to hyphens)."""
    text = re.sub(r"[^\w\- ]", "", heading.strip().lower())
    return text.replace(" ", "-")


def _anchors(path: Path) -> set[str]:
    return {_slug(m.group(1)) for m in re.finditer(r"^#+ (.+)$", path.read_text(encoding="utf-8"),
                                                    re.M)}


def _links(path: Path):
    text = re.sub(r"```.*?```", "", path.read_text(encoding="utf-8"), flags=re.S)
    for m in re.finditer(r"\]\(([^)\s]+)\)", text):
        target = m.group(1)
        if not re.match(r"[a-z]+:", target):
            yield target


# Pages written alongside this folder that a link may name before they exist in a checkout.
_PENDING = {"run-file-formats.md"}


@pytest.mark.parametrize("page", sorted(p.name for p in DOCS.glob("*.md")) + ["../README.md"])
def test_every_link_target_exists(page):
    path = (DOCS / page).resolve()
    for target in _links(path):
        file, _, anchor = target.partition("#")
        dest = (path.parent / file).resolve() if file else path
        if not dest.exists() and dest.name in _PENDING and dest.parent == DOCS:
            continue
        assert dest.exists(), f"{page}: link to {target}: no such file"
        if anchor and dest.suffix == ".md":
            assert anchor in _anchors(dest), f"{page}: link to {target}: no such heading"


def test_the_examples_load():
    from workbench.machine import machine_from_dict
    from workbench.sampling import plan_from_dict

    def first_toml(name):
        return tomllib.loads(re.findall(r"```toml\n(.*?)```", _doc(name), re.S)[0])

    machine = machine_from_dict(first_toml("machine-file.md"))
    plan = plan_from_dict(first_toml("plan-file.md"))
    plan.check_against(machine.lines())
    assert len(plan.limits) == 2 and machine.reference == "motor"


def test_no_pointer_to_a_missing_design_document():
    name = "DESIGN" + ".md"
    hits = []
    for folder in ("workbench", "tests", "bench", "notebooks", "tools"):
        for path in (ROOT / folder).rglob("*"):
            if path.suffix in (".py", ".md", ".ipynb") and path.is_file():
                if name in path.read_text(encoding="utf-8", errors="replace"):
                    hits.append(str(path.relative_to(ROOT)))
    for doc in ("README.md", "DEVELOPERS.md"):
        if name in (ROOT / doc).read_text(encoding="utf-8"):
            hits.append(doc)
    assert not hits, f"point to docs/<page>.md instead of {name}: {hits}"
