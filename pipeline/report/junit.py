"""``junit.xml``: one test case per check × subject that ran, so CI shows failures natively.

Layout (the JUnit XML schema that CI systems read): one ``<testsuite>`` per check id that
ran, named by the id; inside it

* one failing ``<testcase>`` per unwaived error or warning finding (``<failure>`` carries the
  finding's message; its text the subject, source, temperature, values and hint);
* one skipped ``<testcase>`` per waived finding (the message names the waiver's reason);
* one passing ``<testcase>`` per info finding (its message in ``<system-out>``);
* one passing ``<testcase>`` per subject the check examined without any finding: every
  species with a record for the per-record checks, or a single ``(all subjects)`` case for
  checks that examine nothing species-specific (network checks, stage-emitted ids).
  A suite lists at most :data:`MAX_PASSING_CASES` passing species by name (the first in
  sorted order); the rest are one passing case ``(N more species passed)``, so the file
  stays small for a database of a million species (every failure is still its own case).

So the failure count equals the unwaived error/warning findings, and a clean check still
shows up as passing test cases.
"""
from __future__ import annotations

import math
from itertools import islice
import xml.etree.ElementTree as ET

import pandas as pd

FAILING = ("error", "warning")
#: Passing species listed by name per suite; beyond it, one summary case (module doc).
MAX_PASSING_CASES = 2000


def _num(x) -> str:
    try:
        x = float(x)
    except (TypeError, ValueError):
        return ""
    return "" if math.isnan(x) else f"{x:.6g}"


def _case_name(row) -> str:
    name = str(row.subject)
    if isinstance(row.source_id, str) and row.source_id:
        name += f" [{row.source_id}]"
    t = _num(row.t_k)
    if t:
        name += f" at {t} K"
    return name


def _details(row) -> str:
    parts = [f"subject: {row.subject} ({row.subject_kind})"]
    if isinstance(row.source_id, str) and row.source_id:
        parts.append(f"source: {row.source_id}")
    if _num(row.t_k):
        parts.append(f"T: {_num(row.t_k)} K")
    if _num(row.observed) or _num(row.expected):
        unit = row.unit if isinstance(row.unit, str) else ""
        parts.append(f"observed {_num(row.observed)}, expected {_num(row.expected)}, "
                     f"tolerance {_num(row.tolerance)} {unit}".rstrip())
    if isinstance(row.hint, str) and row.hint:
        parts.append(f"hint: {row.hint}")
    parts.append(f"fingerprint: {row.fingerprint}")
    return "\n".join(parts)


def checks_that_ran(run, findings: pd.DataFrame) -> list[str]:
    """Ids that ran: the check functions the stages walked, the ids stages emit themselves
    (``waiver.*`` only when a waivers file was given), and any id that produced a finding."""
    from ..checks import registry

    ran = list(run.extra.get("checks_ran", []))
    for spec in registry.all_specs():
        if spec.func is None and (run.waivers is not None or not spec.id.startswith("waiver.")):
            ran.append(spec.id)
    ran += list(findings["check_id"].dropna().unique()) if len(findings) else []
    return list(dict.fromkeys(ran))


def junit_xml(run, findings: pd.DataFrame) -> str:
    """The XML text (UTF-8) for ``findings`` of ``run``."""
    from ..checks import registry

    ctx = run.extra.get("ctx")
    # the distinct keys by hashing first (Arrow's kernel for text): 10⁵ species, few distinct per row
    species = sorted(ctx.records["species"].dropna().unique().tolist()) \
        if ctx is not None and len(ctx.records) else []
    species_set = set(species)
    root = ET.Element("testsuites", name="thermoledger", id=str(run.run_id))
    totals = dict(tests=0, failures=0, errors=0, skipped=0)
    by_check = {k: g for k, g in findings.groupby("check_id", sort=False)} if len(findings) else {}
    for cid in checks_that_ran(run, findings):
        spec = registry.spec_for(cid)
        per_species = spec is not None and spec.func is not None and spec.stage == "check"
        suite = ET.SubElement(root, "testsuite", name=cid)
        n = dict(tests=0, failures=0, errors=0, skipped=0)
        f = by_check.get(cid)
        seen_names: dict[str, int] = {}
        had_finding: set[str] = set()

        def case(name: str):
            k = seen_names.get(name, 0) + 1
            seen_names[name] = k
            n["tests"] += 1
            return ET.SubElement(suite, "testcase", classname=cid,
                                 name=name if k == 1 else f"{name} #{k}", time="0")

        if f is not None:
            for row in f.itertuples(index=False):
                had_finding.add(str(row.subject))
                tc = case(_case_name(row))
                if bool(row.waived):
                    n["skipped"] += 1
                    ET.SubElement(tc, "skipped", message=f"waived: {row.waiver_reason}")
                elif row.severity in FAILING:
                    n["failures"] += 1
                    fail = ET.SubElement(tc, "failure", message=str(row.message), type=str(row.severity))
                    fail.text = _details(row)
                else:
                    ET.SubElement(tc, "system-out").text = f"{row.severity}: {row.message}"
        if per_species and species:
            # the first MAX_PASSING_CASES passing species, and how many pass (without a
            # list of every passing species per check)
            n_passing = len(species) - len(species_set & had_finding)
            for sp in islice((sp for sp in species if sp not in had_finding), MAX_PASSING_CASES):
                case(sp)
            if n_passing > MAX_PASSING_CASES:
                case(f"({n_passing - MAX_PASSING_CASES} more species passed)")
        elif f is None:
            case("(all subjects)")
        for k, v in n.items():
            suite.set(k, str(v))
            totals[k] += v
        suite.set("time", "0")
    for k, v in totals.items():
        root.set(k, str(v))
    ET.indent(root, space=" ")
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"
