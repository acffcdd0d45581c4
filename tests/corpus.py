"""Run the malformed-input corpus (tests/data/corpus/): each input through the command a user
would run on it, compared with what ``cases.toml`` says must happen.

Used by tests/test_corpus.py and by benchmarks/bench_faults.py. A case is run in its own folder:
a copy of the corpus's base site (weather, lab and configuration inputs) or of an installation
of the demo site (model files and stores), with the input put in place of the file it damages.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import shutil
import tomllib
import traceback
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

CORPUS = Path(__file__).parent / "data" / "corpus"
KINDS = ("weather", "lab", "config", "model", "store")


@dataclass
class Case:
    kind: str
    name: str
    expect: dict[str, Any]

    @property
    def input(self) -> Path:
        return CORPUS / self.kind / self.name

    @property
    def id(self) -> str:
        return f"{self.kind}/{self.name}"


@dataclass
class Outcome:
    status: int | None
    output: str
    traceback: bool
    misread: list[str] = field(default_factory=list)
    """What was read but should not have been (kept rows, span, values): silent wrong data."""
    wrong: list[str] = field(default_factory=list)
    """Other differences from the expectation (status, message, what is left on disk)."""


def cases() -> list[Case]:
    """Every case of cases.toml, and a check that every input has one and no case lacks its
    input."""
    table = tomllib.loads((CORPUS / "cases.toml").read_text(encoding="utf-8"))
    out = [Case(kind, name, expect) for kind in KINDS for name, expect in table[kind].items()]
    on_disk = {f"{k}/{p.name}" for k in KINDS for p in (CORPUS / k).iterdir()}
    listed = {c.id for c in out}
    assert on_disk == listed, (f"inputs without a case: {sorted(on_disk - listed)}; "
                               f"cases without an input: {sorted(listed - on_disk)}")
    return out


def run_command(argv: list[str]) -> tuple[int | None, str, bool]:
    """``cyanorisk`` with ``argv`` in this process: exit status, everything printed, and
    whether a traceback escaped or was printed."""
    from cyanorisk.cli import main

    out = io.StringIO()
    status, escaped = None, False
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
        try:
            status = main(argv)
        except SystemExit as exc:
            status = exc.code if isinstance(exc.code, int) else 1
        except BaseException:
            escaped = True
            out.write(traceback.format_exc())
    text = out.getvalue()
    return status, text, escaped or "Traceback (most recent call last)" in text


def sha256_of(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


# --- the base site: weather, lab and configuration inputs -----------------------------------

def _base_folder(case: Case, folder: Path) -> Path:
    shutil.copytree(CORPUS / "base", folder)
    config = folder / "site.toml"
    text = config.read_text(encoding="utf-8")
    for old, new in case.expect.get("replace", []):
        assert old in text, f"{case.id}: {old!r} is not in the base configuration"
        text = text.replace(old, new)
    config.write_text(text, encoding="utf-8")
    if case.kind == "config":
        shutil.copyfile(case.input, config)
    else:
        shutil.copyfile(case.input, folder / ("weather.csv" if case.kind == "weather" else "lab.csv"))
    return config


def _clean_checks(case: Case, folder: Path, outcome: Outcome) -> None:
    """What ingest left: clean tables or none, the ledger, the rows kept and the span."""
    e = case.expect
    site = folder / "work" / "lake"
    written = (site / "weather.parquet").exists()
    if e.get("clean", e["status"] == 0) != written:
        outcome.wrong.append(f"clean tables {'written' if written else 'not written'}")
    if not written:
        return
    if case.kind == "weather":
        ledger = pd.read_csv(site / "weather_rejects.csv", keep_default_na=False)
    else:
        ledger = pd.read_csv(site / "samples_rejects.csv", keep_default_na=False)
    found = {str(k): int(v) for k, v in ledger["reason"].value_counts().items()} if len(ledger) \
        else {}
    if found != e.get("ledger", {}):
        outcome.misread.append(f"ledger {found} != {e.get('ledger', {})}")
    summary = json.loads((site / "ingest_summary.json").read_text(encoding="utf-8"))
    part = summary["weather"] if case.kind == "weather" else summary["samples"]
    rows = part["rows"]
    if rows["read"] != sum(v for k, v in rows.items() if k != "read"):
        outcome.wrong.append(f"the row account does not balance: {rows}")
    for key in ("kept", "duplicates_identical", "duplicates_conflicting", "off_grid"):
        if key in e and rows.get(key) != e[key]:
            outcome.misread.append(f"{key} {rows.get(key)} != {e[key]}")
    if case.kind == "weather":
        weather = pd.read_parquet(site / "weather.parquet")
        span = [f"{weather.index[0]:%Y-%m-%dT%H:%M}", f"{weather.index[-1]:%Y-%m-%dT%H:%M}"]
        if span != e.get("span", BASE_SPAN):
            outcome.misread.append(f"span {span} != {e.get('span', BASE_SPAN)}")
        for variable, (flag, count) in e.get("flags", {}).items():
            n = int((weather[f"{variable}_flag"].astype(str) == flag).sum())
            if n != count:
                outcome.misread.append(f"{variable} flagged {flag} {n} times, not {count}")
        for variable in ("air_temp_c", "wind_speed_ms"):
            if variable in weather and not weather[variable].dropna().between(-50, 60).all():
                outcome.misread.append(f"{variable} holds an implausible value")
    else:
        totals = pd.read_parquet(site / "sample_totals.parquet")
        if "samples" in e and len(totals) != e["samples"]:
            outcome.misread.append(f"{len(totals)} samples, not {e['samples']}")
        if "max_cells_per_ml" in e:
            top = float(totals["cyano_cells_per_ml"].max())
            if abs(top - e["max_cells_per_ml"]) > 1e-9 * e["max_cells_per_ml"]:
                outcome.misread.append(f"largest total {top:g} cells/mL, not "
                                       f"{e['max_cells_per_ml']:g}")


BASE_SPAN = ["2024-02-29T14:00", "2024-03-04T13:00"]
"""The base log: 96 hourly readings from 1 March 2024 00:00 at UTC+10:00, in UTC."""


def run_base_case(case: Case, folder: Path) -> Outcome:
    config = _base_folder(case, folder)
    command = case.expect.get("command", "check" if case.kind == "config" else "ingest")
    status, text, tb = run_command([command, "--config", str(config)])
    outcome = Outcome(status, text, tb)
    _common_checks(case, outcome)
    if case.kind == "config":
        if command == "check" and (folder / "work").exists():
            outcome.wrong.append("check wrote the data folder")
    else:
        _clean_checks(case, folder, outcome)
    return outcome


# --- an installation of the demo site: model files and stores -------------------------------

MODEL_DAY = "2025-01-10"
"""A report day inside the demo record."""


def _json_path(doc: dict, path: list) -> tuple[Any, Any]:
    for key in path[:-1]:
        doc = doc[key]
    return doc, path[-1]


def place_model(recipe_or_file: Path, model_file: Path, data_dir: Path) -> None:
    """Put a corpus model input in place of the installation's model file."""
    from cyanorisk.integrity import installation_key, key_path, signature
    from cyanorisk.model import _signed_text

    if not recipe_or_file.name.endswith(".recipe.json"):
        shutil.copyfile(recipe_or_file, model_file)
        return
    recipe = json.loads(recipe_or_file.read_text(encoding="utf-8"))
    doc = json.loads(model_file.read_text(encoding="utf-8"))
    if "set" in recipe:
        path, value = recipe["set"]
        parent, key = _json_path(doc, path)
        parent[key] = value
    if "drop" in recipe:
        parent, key = _json_path(doc, recipe["drop"])
        del parent[key]
    sign = recipe["sign"]
    if sign == "installation":
        key = installation_key(data_dir, create=False)
        doc["signature"] = signature(key, _signed_text(doc["body"], doc["cyanorisk_version"]))
    elif sign == "other":
        doc["signature"] = signature(b"another installation's key, 32 b",
                                     _signed_text(doc["body"], doc["cyanorisk_version"]))
    elif sign == "sha256":  # what a plain checksum inside the file would let anyone do
        doc["signature"] = hashlib.sha256(json.dumps(doc["body"], sort_keys=True).encode()
                                          ).hexdigest()
    model_file.write_text(json.dumps(doc), encoding="utf-8")
    if recipe.get("remove_key"):
        key_path(data_dir).unlink()


def run_demo_case(case: Case, folder: Path, demo_site) -> Outcome:
    data, models, reports = folder / "work", folder / "models", folder / "reports"
    demo_site.seed(data)
    demo_site.copy_model(models, data)
    config = demo_site.write_config(folder / "cyanorisk.toml", data_dir=data, models_dir=models,
                                    reports_dir=reports)
    site = demo_site.site.id
    if case.kind == "model":
        target = models / f"{site}.json"
        place_model(case.input, target, data)
        argv = ["report", "--config", str(config), "--site", site, "--as-of", MODEL_DAY]
    else:
        target = data / "cyanorisk.db"
        shutil.copyfile(case.input, target)
        argv = ["status", "--config", str(config)]
    before = sha256_of(target)
    status, text, tb = run_command(argv)
    outcome = Outcome(status, text, tb)
    _common_checks(case, outcome)
    if sha256_of(target) != before:
        outcome.wrong.append(f"{target.name} was changed")
    written = sorted(p.name for p in (reports / site).glob("*")) if (reports / site).exists() \
        else []
    if case.expect["status"] != 0 and written:
        outcome.wrong.append(f"reports written from a refused input: {written}")
    if case.kind == "model" and status not in (0, 3) and not case.expect.get("refused", True):
        outcome.misread.append("the model was refused")
    return outcome


def _common_checks(case: Case, outcome: Outcome) -> None:
    e = case.expect
    if outcome.status != e["status"]:
        outcome.wrong.append(f"exit status {outcome.status}, not {e['status']}")
    for words in e.get("says", []):
        if words not in outcome.output:
            outcome.wrong.append(f"the output does not say {words!r}")
    if e["status"] != 0:
        errors = [line for line in outcome.output.splitlines() if line.startswith("cyanorisk: ")]
        if case.kind != "config" or e.get("command", "check") != "check":
            if len(errors) != 1:
                outcome.wrong.append(f"{len(errors)} error lines, not one: {errors}")
        if "\x00" in outcome.output:
            outcome.wrong.append("a raw NUL byte was printed")


def run_case(case: Case, folder: Path, demo_site=None) -> Outcome:
    if case.kind in ("model", "store"):
        return run_demo_case(case, folder, demo_site)
    return run_base_case(case, folder)
