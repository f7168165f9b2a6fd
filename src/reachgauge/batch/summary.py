"""What the end of a run prints: counts over every reach, from each reach's
small tally (kept in its checkpoint part, so a resumed run counts the reaches
an earlier run finished)."""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path


def tally(out) -> dict:
    """The small, picklable record of one reach's output the summary needs."""
    from reachgauge.flags import has_quality_flag, worst
    from reachgauge.hydraulics.bankfull import TRUSTED_CONFIDENCE

    row = out.reach_row
    t = {"transects": int(row.get("transects", 0) or 0), "transects_ok": 0, "trusted": 0,
         "flagged": 0, "out_of_bank": 0, "flags": {}, "worst": {}}
    if out.result is not None:
        tr = out.result.transects
        t.update(transects=len(tr), transects_ok=int((tr["status"] == "ok").sum()),
                 trusted=int(tr["confidence"].isin(TRUSTED_CONFIDENCE).sum()),
                 flagged=int(sum(has_quality_flag(f) for f in tr["flags"])),
                 out_of_bank=int((tr["flows_out"] != "").sum()),
                 flags=dict(Counter(x for f in tr["flags"] for x in f.split(";") if x)),
                 worst=dict(Counter(worst(f) or "none" for f in tr["flags"])))
    return {"reach_id": out.reach_id, "reach_row": dict(row), "tally": t,
            "error": out.error, "seconds": out.seconds}


@dataclass
class RunSummary:
    """What the end-of-run summary prints."""

    reaches: int
    reaches_ok: int
    transects: int
    transects_ok: int
    flagged: int
    out_of_bank_transects: int
    flag_counts: dict
    statuses: dict
    out_of_bank: list
    failed: list
    out: Path | None
    report: Path | None
    elapsed: float
    warnings: list
    trusted: int = 0                                     # transects with a trusted pick
    withheld: dict = field(default_factory=dict)         # "do not use" flag -> transects
    notes: list = field(default_factory=list)            # choices the run made (e.g. serial)
    by_worst: dict = field(default_factory=dict)         # transects by their gravest flag
    timings: dict = field(default_factory=dict)          # seconds: wall, task, read, keep, write

    def lines(self) -> list[str]:
        out = [f"reaches:    {self.reaches_ok} of {self.reaches} processed"
               + (f" ({', '.join(f'{v} {k}' for k, v in self.statuses.items())})"
                  if self.statuses else ""),
               f"transects:  {self.transects_ok} of {self.transects} with figures, "
               f"{self.trusted} with a trusted bankfull pick, {self.out_of_bank_transects} where "
               "a design flow leaves the channel"]
        if self.by_worst:
            w = self.by_worst
            out.append(f"sections:   {w.get('do not use', 0)} do not use, {w.get('check', 0)} to "
                       f"check, {w.get('information', 0)} information only, {w.get('none', 0)} "
                       "clean (by their gravest flag, design-flow results aside)")
        if self.flag_counts:
            from reachgauge.flags import severity

            top = sorted(self.flag_counts.items(), key=lambda kv: -kv[1])[:6]
            out.append("flags:      " + ", ".join(f"{k} {v} ({severity(k)})" for k, v in top))
        if self.withheld:
            out.append("no bankfull figure (do not use): " + ", ".join(
                f"{k} {v}" for k, v in sorted(self.withheld.items(), key=lambda kv: -kv[1])))
        if self.out_of_bank:
            out.append("out of bank: " + "; ".join(self.out_of_bank))
        if self.failed:
            out.append("internal errors on: " + ", ".join(self.failed)
                       + " (please report; run with --verbose for details)")
        for w in self.warnings:
            out.append(f"warning:    {w}")
        for n in self.notes:
            out.append(f"note:       {n}")
        if self.out:
            out.append(f"result:     {self.out}")
        if self.report:
            out.append(f"report:     {self.report}")
        out.append(f"time:       {self.elapsed:.1f} s")
        return out


def summarise(run, out=None, report=None) -> RunSummary:
    from reachgauge.flags import severity

    statuses = Counter(h["reach_row"].get("status", "") for h in run.headers)
    flag_counts: Counter = Counter()
    by_worst: Counter = Counter()
    sums = Counter()
    oob = []
    for h in run.headers:
        t = h["tally"]
        sums.update({k: t[k] for k in ("transects", "transects_ok", "trusted", "flagged",
                                       "out_of_bank")})
        flag_counts.update(t["flags"])
        by_worst.update(t.get("worst", {}))
        if h["reach_row"].get("flows_out"):
            oob.append(f"{h['reach_id']} ({h['reach_row']['flows_out'].replace(';', ', ')})")
    ok = statuses.pop("ok", 0)
    withheld = {k: v for k, v in flag_counts.items() if severity(k) == "do not use"}
    return RunSummary(len(run.headers), ok, sums["transects"], sums["transects_ok"],
                      sums["flagged"], sums["out_of_bank"], dict(flag_counts), dict(statuses), oob,
                      [h["reach_id"] for h in run.headers if h["error"]], out, report,
                      run.elapsed, run.warnings, sums["trusted"], withheld,
                      notes=list(run.notes), timings=dict(run.timings), by_worst=dict(by_worst))
