"""Write the reference pages of docs/ from the code, so they never drift from it.

* ``docs/case-format.md`` from the table of case settings (``solver.window.settings.SETTINGS``)
  and the element-body fields;
* ``docs/cli.md`` from the command line's own ``--help`` texts;
* ``docs/validation.md`` (with ``--validation``) from what the tests measured against outside
  sources in their last whole run (``test-artifacts/validation.json``, written by the tests'
  ``validation`` fixture).

Run ``python docs/make_docs.py`` after changing a setting or a command; ``tests/test_docs.py``
fails while a page is out of date. Run the whole test suite, then ``python docs/make_docs.py
--validation``, before a release.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import sys
from pathlib import Path

DOCS = Path(__file__).resolve().parent
ROOT = DOCS.parent

# Element bodies ([[bodies]] tables and element CSV columns): name, unit, what it is.
ELEMENT_FIELDS = (
    ("name", "", "Name of the body; looked up case-insensitively (required)."),
    ("central_body", "", "The body it orbits (default sun); may be an element body given earlier."),
    ("epoch_utc", "UTC", "Epoch of the elements, ISO 8601 (or epoch_jd_tdb; exactly one)."),
    ("epoch_jd_tdb", "JD TDB", "Epoch of the elements as a Julian date in TDB."),
    ("semi_major_axis_au", "au", "Semi-major axis; negative for a hyperbola (or _km; one)."),
    ("semi_major_axis_km", "km", "Semi-major axis in km."),
    ("eccentricity", "", "0 <= e < 1 ellipse, e > 1 hyperbola (required)."),
    ("inclination_deg", "deg", "Inclination to the frame's reference plane, 0 to 180 (required)."),
    ("raan_deg", "deg", "Longitude (right ascension) of the ascending node (required)."),
    ("arg_periapsis_deg", "deg", "Argument of periapsis (required)."),
    ("mean_anomaly_deg", "deg", "Mean anomaly at the epoch (or true_anomaly_deg; exactly one)."),
    ("true_anomaly_deg", "deg", "True anomaly at the epoch."),
    ("gm_km3_s2", "km³/s²", "The body's own GM (optional; needed to orbit or enter it)."),
    ("radius_km", "km", "The body's radius (optional; needed for parking and capture orbits)."),
    (
        "frame",
        "",
        "Frame of the elements: ecliptic (J2000 ecliptic; default about the Sun), icrf (default "
        "about a planet) or equator (the central body's equator, from its IAU pole).",
    ),
)

# Launch vehicles ([[vehicles]]) and propulsion systems ([[propulsion]]): name, unit, what it is.
VEHICLE_FIELDS = (
    ("name", "", "Name of the vehicle, unique in the case (required)."),
    (
        "performance",
        "",
        "Array of at least two rows `{ c3_km2_s2 = ..., mass_kg = ... }`: C3 strictly "
        "increasing, mass >= 0 and never increasing (required). Read with monotone cubic (PCHIP) "
        "interpolation; no mass outside the table's C3 range (never extrapolated).",
    ),
    ("performance[].c3_km2_s2", "km²/s²", "Launch energy of the row."),
    ("performance[].mass_kg", "kg", "Mass the vehicle injects at that C3."),
    ("adapter_kg", "kg", "Deducted from the curve's mass (payload adapter); default 0."),
    (
        "margin_fraction",
        "",
        "Fraction of the curve's mass held back, 0 to 0.99, applied before the adapter; default 0.",
    ),
)
PROPULSION_FIELDS = (
    ("name", "", "Name of the system (required)."),
    ("isp_s", "s", "Specific impulse, above 0 (required)."),
    (
        "burns",
        "",
        'The burns it makes: "departure" (from the parking orbit, instead of the launch '
        'vehicle; or leaving a body without mass) and/or "arrival"; each burn by one system.',
    ),
)


def _cell(text: object) -> str:
    return str(text).replace("|", "\\|").replace("\n", " ")


def case_format() -> str:
    """The case-format page: every key of a case file, its unit, default and bounds."""
    from solver.window.settings import SETTINGS

    lines = [
        "# Case files",
        "",
        "<!-- Written by docs/make_docs.py from solver/window/settings.py: edit those, then run",
        "     python docs/make_docs.py. -->",
        "",
        "A case is a TOML file: the bodies, the date windows, the transfer, the orbits at each",
        "end, the limits and, optionally, bodies of your own given by orbital elements, launch",
        "vehicles, a launch site, the spacecraft and its propulsion (mass and launch). Unknown",
        "keys are refused, so a misspelt limit is never silently ignored; every refusal names the",
        "key, the value and what is accepted. The sample cases in `sample_cases/` are invented",
        "missions.",
        "",
        "Dates are ISO 8601 UTC (`2031-05-01` or `2031-05-01T06:00:00Z`); the engine works in TDB.",
        "Grid dates given on whole UTC days (or minutes) land on those instants; both ends of a",
        "window are kept when the step divides it.",
        "",
    ]
    section = None
    for s in SETTINGS:
        if s.section != section:
            section = s.section
            lines += [
                "",
                f"## [{section}]",
                "",
                "| key | unit | default | accepted | link | what it is |",
                "| --- | --- | --- | --- | --- | --- |",
            ]
        if s.required:
            default = "required"
        elif s.default is None:
            default = "not set"
        elif s.default == "":
            default = "empty"
        else:
            default = f"`{s.default}`"
        lines.append(
            f"| `{s.name}` | {_cell(s.unit)} | {_cell(default)} | {_cell(s.accepted)} | "
            f"{_cell(s.url or '')} | {_cell(s.description)} |"
        )
    lines += [
        "",
        "The *link* column names the parameter of a dashboard link that carries the setting.",
        "",
        "## [[bodies]]",
        "",
        "Any number of tables, each one body on a two-body orbit (the same fields are the columns",
        "of an element CSV for surveys). Motion is exact two-body motion about the central body,",
        "with GM(central) + GM(body).",
        "",
        "| key | unit | what it is |",
        "| --- | --- | --- |",
    ]
    lines += [
        f"| `{name}` | {_cell(unit)} | {_cell(what)} |" for name, unit, what in ELEMENT_FIELDS
    ]
    for title, intro, fields in (
        (
            "[[vehicles]]",
            "Any number of launch vehicles, compared side by side; the mass metrics use "
            "`spacecraft.vehicle`, else the first. Only for departures from a body with mass.",
            VEHICLE_FIELDS,
        ),
        (
            "[[propulsion]]",
            "The spacecraft's propulsion systems and the burns each makes (rocket equation per "
            "burn). A burn no system makes gives no delivered mass, unless its Δv is 0.",
            PROPULSION_FIELDS,
        ),
    ):
        lines += [
            "",
            f"## {title}",
            "",
            intro,
            "",
            "| key | unit | what it is |",
            "| --- | --- | --- |",
        ]
        lines += [f"| `{name}` | {_cell(unit)} | {_cell(what)} |" for name, unit, what in fields]
    example = (ROOT / "sample_cases" / "vesper_venus_orbiter.toml").read_text().strip()
    lines += ["", "## Example", "", "```toml", example, "```", ""]
    lines += sequence_sections()
    return "\n".join(lines)


def sequence_sections() -> list[str]:
    """The [sequence] part of the case-format page, from solver/sequence/settings.py."""
    from solver.sequence.settings import FLYBY_ALTITUDE_MIN_KM, SEQUENCE_SETTINGS

    def table(section: str) -> list[str]:
        rows = [
            "| key | unit | default | accepted | what it is |",
            "| --- | --- | --- | --- | --- |",
        ]
        for s in SEQUENCE_SETTINGS:
            if s.section != section:
                continue
            default = (
                "required" if s.required else ("not set" if s.default is None else f"`{s.default}`")
            )
            rows.append(
                f"| `{s.name}` | {_cell(s.unit)} | {_cell(default)} | {_cell(s.accepted)} | "
                f"{_cell(s.description)} |"
            )
        return rows

    lines = [
        "## [sequence]",
        "",
        "Optional: the bodies between the departure and the target (`arcwindow sequence`). One",
        "`[sequence]` table, or several `[[sequence]]` tables ranked together (they share the",
        "objective). `[window]` gives the departure dates and the window the final arrival must",
        "fall in; `[limits]` apply as for one leg (C3 and DLA at departure, arrival v∞ at the end,",
        "TOF on every leg); a round trip's `target_body` is its departure body. A case without",
        "this section is a sequence of one leg.",
        "",
        *table("sequence"),
        "| `legs` | | required | one or more `[[sequence.legs]]` tables | The legs, in order. |",
        "| `flyby_altitude_min_km` | km | the defaults below | a table `{ body = altitude }` | "
        "Lowest flyby altitude per body. |",
        "",
        "## [[sequence.legs]]",
        "",
        "One table per leg, in order; each says where the leg ends and what happens there.",
        "",
        *table("leg"),
        "",
        "## Lowest flyby altitudes",
        "",
        "arcwindow's defaults for preliminary design (a case sets its own per body or per flyby);",
        "a body defined by elements with GM and radius defaults to a tenth of its radius.",
        "",
        "| body | altitude, km | why |",
        "| --- | --- | --- |",
        *[
            f"| {body} | {km:g} | {_cell(why)} |"
            for body, (km, why) in FLYBY_ALTITUDE_MIN_KM.items()
        ],
        "",
        "## Sequence example",
        "",
        "```toml",
        (ROOT / "sample_cases" / "sequences" / "harrow_jupiter_veega.toml").read_text().strip(),
        "```",
        "",
    ]
    return lines


def cli() -> str:
    """The command-line page: the help of ``arcwindow`` and of every subcommand."""
    from app.cli import build_parser

    os.environ["COLUMNS"] = "100"  # argparse wraps to the terminal width; fix it
    parser = build_parser()
    lines = [
        "# Command line",
        "",
        "<!-- Written by docs/make_docs.py from the commands' --help: edit the commands, then run",
        "     python docs/make_docs.py. -->",
        "",
        "Every subcommand has `--help`. Bad input gets one line naming the field, the value and",
        "what is accepted, and exit status 2; an interrupted command exits with 130.",
        "",
        "```text",
        parser.format_help().rstrip(),
        "```",
    ]
    subparsers = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    for name, sub in subparsers.choices.items():
        lines += ["", f"## arcwindow {name}", "", "```text", sub.format_help().rstrip(), "```"]
    return "\n".join(lines) + "\n"


PAGES = {"case-format.md": case_format, "cli.md": cli}

VALIDATION_RECORD = ROOT / "test-artifacts" / "validation.json"


def _number(value: float) -> str:
    return f"{value:.3g}" if value and (abs(value) < 1e-3 or abs(value) >= 1e4) else f"{value:.4g}"


def validation(record: dict) -> str:
    """The validation report: each check against an outside source and what it measured."""
    checks = sorted(record["checks"], key=lambda row: (row["test"].split("::")[0], row["check"]))
    lines = [
        "# Validation",
        "",
        "<!-- Written by `python docs/make_docs.py --validation` from the measurements of the",
        "     last whole test run (test-artifacts/validation.json); never edited by hand. -->",
        "",
        f"Engine {record['engine_version']}. Every row is a check that passed: the quantity",
        "compared, the outside source (sections refer to docs/references.md), how far that source",
        "was verified, the agreement measured and the tolerance the test allows. Tags: FOUND, read",
        "in the source; SECONDARY, a transcription; MEMORY, recalled; COMPUTED, recomputed",
        "independently.",
        "",
        "| check | source | tag | measured | tolerance | test |",
        "| --- | --- | --- | --- | --- | --- |",
    ]
    for row in checks:
        unit = f" {row['unit']}" if row["unit"] else ""
        note = f" ({row['note']})" if row["note"] else ""
        lines.append(
            f"| {_cell(row['check'])}{_cell(note)} | {_cell(row['source'])} | {_cell(row['tag'])}"
            f" | {_number(row['measured'])}{_cell(unit)} | {_number(row['tolerance'])}{_cell(unit)}"
            f" | `{row['test'].split('::')[0]}` |"
        )
    return "\n".join(lines) + "\n"


def main() -> int:
    if "--validation" in sys.argv[1:]:
        import json

        record = json.loads(VALIDATION_RECORD.read_text())
        (DOCS / "validation.md").write_text(validation(record))
        print("wrote docs/validation.md")
        return 0
    for name, make in PAGES.items():
        with contextlib.redirect_stdout(io.StringIO()):
            text = make()
        (DOCS / name).write_text(text)
        print(f"wrote docs/{name}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
