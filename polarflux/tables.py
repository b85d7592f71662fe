"""Plain-text tables of the results: what the commands print and the CSV files they write."""

from __future__ import annotations

import csv
import io
import math

from .timeseries import format_date

__all__ = ["events_table", "events_csv", "forecast_text", "cycles_table"]


def forecast_text(result: dict) -> str:
    cal, proj, fc = result["calibration"], result["projection"], result["forecast"]
    a, m = fc["amplitude"], fc["maximum_time"]
    lines = [
        f"forecast as of {format_date(result['as_of'])}, proxy |{result['proxy']}| at minimum"
        + (f"; forecast: {result['phase']['text']}" if result.get("phase") else ""),
        f"calibration: {_law_text(cal)} on {len(cal['pairs'])} cycles",
        "hindcast errors (leave one out, predicted - actual): "
        + ", ".join(f"{p['cycle']}: {e:+.1f}" for p, e in zip(cal["pairs"], cal["loo_errors"], strict=True))
        + f"; rms {cal['loo_rms']:.1f}",
        f"projection: {proj['method']} ({proj['members']} members); proxy at minimum "
        f"{proj['proxy_at_minimum']['median']:.2f} (95 %: {proj['proxy_at_minimum']['low95']:.2f}-"
        f"{proj['proxy_at_minimum']['high95']:.2f}); minimum {format_date(proj['minimum_time']['median'])}",
        f"next cycle amplitude: {a['median']:.0f} (68 %: {a['low68']:.0f}-{a['high68']:.0f}; "
        f"95 %: {a['low95']:.0f}-{a['high95']:.0f})",
        f"next maximum: {format_date(m['median'])} (68 %: {format_date(m['low68'])} to {format_date(m['high68'])}; "
        f"95 %: {format_date(m['low95'])} to {format_date(m['high95'])})",
        *([("spread of the amplitude (share of its variance): "
            + ", ".join(f"{k} {100 * v:.0f} %" for k, v in sorted(fc["spread_budget"].items(), key=lambda kv: -kv[1])))]
          if fc.get("spread_budget") else []),
        *_hemispheres_text(result.get("hemispheres")),
        "caution: " + result["caution"],
    ]
    if cal.get("warning"):
        lines.insert(2, "WARNING: " + cal["warning"])
    return "\n".join(lines)


def _hemispheres_text(hemispheres: dict | None) -> list[str]:
    """The hemispheric forecast's lines (none without hemispheric sunspot numbers)."""
    if not hemispheres:
        return []
    if hemispheres.get("why"):
        return [f"hemispheres: not forecast ({hemispheres['why']})"]
    parts = []
    for h in ("north", "south"):
        a = hemispheres[h]["amplitude"]
        parts.append(f"{h} {a['median']:.0f} (68 %: {a['low68']:.0f}-{a['high68']:.0f}; "
                     f"95 %: {a['low95']:.0f}-{a['high95']:.0f})")
    lines = [f"hemispheres (each cap against its own hemisphere's maximum, {len(hemispheres['pairs'])} pairs: "
             f"{_law_text(hemispheres)}; leave-one-out rms {hemispheres['loo_rms']:.1f}): " + "; ".join(parts)]
    if hemispheres.get("warning"):
        lines.append("WARNING (hemispheres): " + hemispheres["warning"])
    return lines


def _law_text(cal: dict) -> str:
    errors = ", ".join(f"{x:.2f}" if cal.get("law") == "proportional" else f"{x:.1f}" for x in cal["standard_errors"])
    if cal.get("law") == "proportional":
        return (f"amplitude = {cal['slope']:.1f} x proxy, log-normal (standard error of ln k {errors}; "
                f"scatter {cal['residual_sd']:.2f} in ln amplitude)")
    return (f"amplitude = {cal['intercept']:.1f} + {cal['slope']:.1f} x proxy (standard errors {errors}; "
            f"residual sd {cal['residual_sd']:.1f})")


def events_table(found: dict) -> str:
    lines = []
    for f in found["scale_factors"]:
        lines.append(f"scale {f['instrument']} -> {f['reference']} ({f['quantity']}): {f['factor']:.4f} "
                     f"+/- {f['uncertainty']:.4f} (95 %: {f['low95']:.4f}-{f['high95']:.4f}, {f['pairs']} rotations; "
                     f"noise variance of {f['reference']} / {f['instrument']}: {f.get('error_ratio', 1.0):.3g})")
    if found["scale_factors"]:
        lines.append("separate cap factors needed: " + ("yes" if found["band_factors_needed"] else
                                                        "no (one polar factor fits both caps and the dipole)"))
    fill = found.get("fill") or "not recorded"
    lines.append(f"polar fields: unseen part of the caps filled: {fill}" + (
        " (each map leaves out what it did not see: values are low where a pole was hidden)" if fill == "none" else
        "" if fill == "not recorded" else "; at minima, +/- its uncertainty"))
    lines.append(f"{'event':<18} {'hemisphere':<10} {'date':<10}  {'window':<23}  value")
    for hemisphere in ("north", "south"):
        for r in found["reversals"][hemisphere]:
            first, last = format_date(r["earliest"]), format_date(r["latest"])
            window = f"{first}..{last}" if r["latest"] > r["earliest"] and first != last else "-"
            lines.append(f"{'polar reversal':<18} {hemisphere:<10} {format_date(r['time']):<10}  {window:<23}  "
                         f"to {'+' if r['new_sign'] > 0 else '-'}")  # the report's words
    for lag in found["reversal_lags"]:
        lines.append(f"{'reversal lag':<18} {'S - N':<10} {format_date(lag['north']):<10}  {'':<23}  {lag['lag_years']:+.2f} yr")
    for m in found["minima"]:
        lines.append(f"{'cycle minimum':<18} {'':<10} {format_date(m['time']):<10}  {'':<23}  SSN {m['sunspot_number']:.1f}")
    for m in found["maxima"]:
        lines.append(f"{'cycle maximum':<18} {'':<10} {format_date(m['time']):<10}  {'':<23}  SSN {m['sunspot_number']:.1f}")
    for a in found["at_minima"]:
        north, south = (f"{a[h]:+.2f}" + (f" +/- {a[h + '_fill_error']:.2f}" if math.isfinite(
            a.get(h + "_fill_error", math.nan)) else "") for h in ("north", "south"))
        lines.append(f"{'at minimum':<18} {'N / S / D':<10} {format_date(a['time']):<10}  {'':<23}  "
                     f"{north} / {south} / {a['axial_dipole']:+.2f} G, asymmetry {a['asymmetry']:+.2f}")
    return "\n".join(lines)


def events_csv(found: dict) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer)
    writer.writerow(["event", "hemisphere", "time_year", "date", "earliest_year", "latest_year", "value", "unit"])
    for hemisphere in ("north", "south"):
        for r in found["reversals"][hemisphere]:
            writer.writerow(["reversal", hemisphere, f"{r['time']:.4f}", format_date(r["time"]), f"{r['earliest']:.4f}",
                             f"{r['latest']:.4f}", r["new_sign"], "new sign"])
    for kind in ("minima", "maxima"):
        for m in found[kind]:
            writer.writerow([kind[:-1] + "um", "", f"{m['time']:.4f}", format_date(m["time"]), "", "",
                             f"{m['sunspot_number']:.2f}", "sunspot number"])
    for a in found["at_minima"]:
        for key, unit in (("north", "G"), ("south", "G"), ("axial_dipole", "G"), ("asymmetry", "1")):
            writer.writerow([f"{key}_at_minimum", "", f"{a['time']:.4f}", format_date(a["time"]), "", "",
                             f"{a[key]:.4f}", unit])
    return buffer.getvalue()


def cycles_table(truth: dict) -> str:
    head = f"{'cycle':>5} {'start':>7} {'max':>7} {'amplitude':>9} {'dipole at start':>15}  (years from start; truth)"
    lines = [head]
    for c in truth["cycles"]:
        peak = "-" if c["maximum_years"] is None else f"{c['maximum_years']:.2f}"
        lines.append(f"{c['cycle']:>5} {c['start_years']:>7.2f} {peak:>7} {c['amplitude']:>9.1f} "
                     f"{c['precursor_dipole_g']:>13.2f} G")
    return "\n".join(lines)
