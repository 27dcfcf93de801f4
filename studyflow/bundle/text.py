"""Plain-text renderings of pack and audit results for a person at a terminal."""

from __future__ import annotations

from typing import Any

from .pack import PackResult
from .review import CAUTION, AuditReport


def _size(n: int) -> str:
    for unit in ("B", "KiB", "MiB", "GiB"):
        if n < 1024 or unit == "GiB":
            return f"{n:.0f} {unit}" if unit == "B" else f"{n:.1f} {unit}"
        n /= 1024
    return str(n)


def pack_text(result: PackResult) -> str:
    lines = [f"bundle written: {result.archive}",
             f"  {result.files} files, {_size(result.bytes)} before compression",
             f"  manifest sha256: {result.manifest_sha256}",
             "  (send this digest to the reviewer separately: it pins every file hash in the bundle)"]
    for command, info in sorted(result.solvers.items()):
        shown = info.get("version") or info.get("output") or info.get("error")
        lines.append(f"  solver {command}: {shown}")
    for w in result.warnings:
        lines.append(f"  warning: {w}")
    if result.skipped:
        lines.append(f"  left out: {len(result.skipped)}")
        for s in result.skipped[:20]:
            lines.append(f"    {s['path']}  ({s['why']})")
        if len(result.skipped) > 20:
            lines.append(f"    ... {len(result.skipped) - 20} more")
    return "\n".join(lines)


def _note(n: dict[str, Any]) -> str:
    if n.get("what") in ("solver version", "python version", "package version"):
        extra = f" ({n['error_now']})" if n.get("error_now") else ""
        return f"{n['what']} changed: {n['name']} {n.get('packed')!s} when packed, {n.get('now')!s} now{extra}"
    if n.get("what") == "solver not found":
        return f"solver not found on this machine: {n['name']} ({n.get('packed')} when packed); a re-run cannot use it"
    return f"{n.get('what')}: {n.get('now')}"


def audit_text(report: AuditReport, limit: int = 40) -> str:
    ph = report.phases
    out = [f"audit of study {report.study!r}", f"  bundle: {report.bundle}", f"  unpacked at: {report.root}",
           f"  manifest sha256: {report.manifest_sha256}"]
    i = ph.get("integrity")
    if i:
        d = i.detail
        out.append(f"files: {d['checked']} checked against the manifest; {len(d['missing'])} missing, "
                   f"{len(d['altered'])} altered, {len(d['unexpected'])} unexpected"
                   + (f", {len(d['unsafe'])} links or special files" if d["unsafe"] else ""))
    e = ph.get("environment")
    if e:
        packed = e.detail.get("packed", {})
        out.append(f"packed: {packed.get('packed')} with studyflow {packed.get('studyflow')}, Python "
                   f"{packed.get('python')} on {packed.get('platform')}")
        now = e.detail.get("now", {})
        for command, then in sorted((packed.get("solvers") or {}).items()):
            if command in now:
                n = now[command]
                shown = n.get("version") or n.get("output") or f"unknown ({n.get('error')})"
                out.append(f"solver {command}: {then} when packed, {shown} here")
            else:
                out.append(f"solver {command}: {then} when packed (shipped with the study; checked by its hash)")
    r = ph.get("rerender")
    if r and r.ran:
        if r.error:
            out.append(f"re-render: could not be done: {r.error}")
        else:
            d = r.detail
            state = "all byte-identical" if r.ok else "DIFFERENCES"
            out.append(f"re-render: {d.get('cases', 0)} cases, {d.get('files', 0)} input files: {state}")
    rr = ph.get("rerun")
    if rr:
        if not rr.ran:
            out.append("re-run: none asked (use --rerun all, --rerun-sample N --seed S or --rerun-case ID)")
        elif rr.error:
            out.append(f"re-run: could not be done: {rr.error}")
        else:
            d = rr.detail
            checks = d.get("checks", [])
            bad = sum(1 for c in checks if not c["ok"])
            skipped = sum(1 for c in checks if not c.get("compared", True))
            n_cases = len(d.get("cases", []))
            out.append(f"re-run: {n_cases} case{'s' if n_cases != 1 else ''} ({d.get('how')}): "
                       f"{len(checks) - skipped} quantity checks, {bad} outside tolerance"
                       + (f", {skipped} not compared (audit.ignore)" if skipped else ""))
            for c in checks[:limit]:
                if not c.get("compared", True):
                    out.append(f"  --   {c['case']} {c['quantity']}: {c['reason']}")
                    continue
                mark = "ok  " if c["ok"] else "FAIL"
                out.append(f"  {mark} {c['case']} {c['quantity']} ({c['kind']}, {c['values']} values, "
                           f"max |diff| {c['max_abs_diff']:.3g}, rtol {c['rtol']:g}, atol {c['atol']:g})"
                           + (f": {c['reason']}" if c["reason"] else ""))
            if len(checks) > limit:
                out.append(f"  ... {len(checks) - limit} more (see --json)")
    u = ph.get("uncertainty")
    if u:
        if u.error:
            out.append(f"uncertainty table: could not be re-computed: {u.error}")
        elif not u.ran:
            out.append(f"uncertainty table: not checked ({u.detail.get('summary', '')})")
        else:
            out.append(f"uncertainty table: {u.detail.get('summary', '')}")
    if report.notes:
        out.append("notes:")
        out += [f"  - {_note(n)}" for n in report.notes]
    if report.failures:
        out.append(f"problems ({len(report.failures)}):")
        out += [f"  - {f}" for f in report.failures[:limit]]
        if len(report.failures) > limit:
            out.append(f"  ... {len(report.failures) - limit} more (see --json)")
    if report.scratch:
        out.append(f"scratch kept at: {report.scratch}")
    verdict = "PASS: the bundle is intact and reproduced" if report.ok else "FAIL"
    out.append(f"verdict: {verdict} (exit code {report.exit_code})")
    out.append(CAUTION)
    return "\n".join(out)
