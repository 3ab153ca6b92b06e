"""Authoring commands: ``new``, ``check``, ``preview``, ``schema``."""

from __future__ import annotations

import argparse
import json
import re
import sys
from pathlib import Path
from typing import Any

from shapely.errors import GEOSException

from ..errors import Finding, NeurodromeError, Problem, WorldFileError
from ..jsonio import dump_json, write_atomic
from ..world import templates
from ..world.geometry import build_geometry
from ..world.lint import lint, summarize
from ..world.load import load_world, world_from_data
from ..world.spec import world_json_schema


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("new", help="write a world file from a template",
                       description="Write a valid world file from a template.")
    p.add_argument("kind", choices=templates.KINDS, help="template: " + ", ".join(templates.KINDS))
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="world file to write")
    p.add_argument("--width", type=float, help="corridor width, metres (default 0.5)")
    p.add_argument("--stem", type=float, help="length from the dispatch bay to the first junction, metres")
    p.add_argument("--arm", type=float, help="length of each arm past the junction, metres")
    p.add_argument("--angles", help="arms template: arm headings in degrees, comma separated (0 = east)")
    p.add_argument("--trials", type=int, help="trials per evaluation")
    p.add_argument("--relocate", choices=("none", "fixed", "window"),
                   help="restock: none, after a fixed trial, or after a trial drawn from a window")
    p.add_argument("--relocations", type=int, help="how many restock events (default 1; 3 for double-junction)")
    p.add_argument("--name", help="world name (default: the template's)")
    p.add_argument("--force", action="store_true", help="overwrite FILE if it exists")
    p.set_defaults(func=cmd_new)

    p = sub.add_parser("check", help="validate and lint world files",
                       description="Validate and lint world files. Exit 0 when clean or only "
                                   "warnings, 2 when any file has errors.")
    p.add_argument("files", nargs="+", metavar="FILE")
    p.add_argument("--strict", action="store_true", help="treat warnings as errors")
    p.add_argument("--json", action="store_true", help="machine-readable output on stdout")
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("preview", help="draw a world to a PNG",
                       description="Draw a world (walls, sites and their values, home, robot and rays) to a PNG.")
    p.add_argument("file", metavar="FILE")
    p.add_argument("-o", "--output", required=True, metavar="PNG")
    p.add_argument("--size", default="1200x900", metavar="WxH", help="picture size in pixels (default 1200x900)")
    p.set_defaults(func=cmd_preview)

    p = sub.add_parser("schema", help="print the JSON Schema of a file format (world, study, evolver, network)",
                       description="Print the JSON Schema of the world file, or with --of of another file "
                                   "format (or write it with -o).")
    p.add_argument("-o", "--output", metavar="FILE")
    p.add_argument("--of", choices=("world", "study", "evolver", "network"), default="world",
                   help="which format: world (default), study, evolver (the evolve --config file), network")
    p.set_defaults(func=cmd_schema)


# -- new ------------------------------------------------------------------------------

def _option_problems(args: argparse.Namespace) -> list[Problem]:
    problems = []
    for flag in ("width", "stem", "arm"):
        v = getattr(args, flag)
        if v is not None and not (0 < v <= 1e3):
            problems.append(Problem(f"--{flag}", "a length in metres, above 0 and at most 1000", f"{v:g}"))
    if args.trials is not None and not (1 <= args.trials <= 100_000):
        problems.append(Problem("--trials", "a whole number from 1 to 100000", str(args.trials)))
    if args.relocations is not None and not (1 <= args.relocations <= 1000):
        problems.append(Problem("--relocations", "a whole number from 1 to 1000", str(args.relocations)))
    takes = templates.options(args.kind)
    for flag in ("stem", "arm", "angles"):
        if getattr(args, flag) is not None and flag not in takes:
            users = [k for k in templates.KINDS if flag in templates.options(k)]
            problems.append(Problem(f"--{flag}", f"only with the template(s) {', '.join(users)}", f"template {args.kind}"))
    return problems


def _parse_angles(text: str) -> list[float]:
    try:
        angles = [float(a) for a in text.split(",") if a.strip()]
    except ValueError:
        raise WorldFileError(Problem("--angles", "degrees separated by commas, e.g. 150,90,30", repr(text))) from None
    if not angles or not all(-360 <= a <= 360 for a in angles):
        raise WorldFileError(Problem("--angles", "one or more headings within -360..360 degrees", repr(text)))
    return angles


def cmd_new(args: argparse.Namespace) -> int:
    problems = _option_problems(args)
    if problems:
        raise WorldFileError(problems)
    out = Path(args.output)
    if out.exists() and not args.force:
        raise WorldFileError(Problem(str(out), "a file that does not exist yet (or --force)", "an existing file"))
    options: dict[str, Any] = {
        "width": args.width, "stem": args.stem, "arm": args.arm, "trials": args.trials,
        "relocate": args.relocate, "relocations": args.relocations, "name": args.name,
    }
    if args.angles is not None:
        options["angles"] = _parse_angles(args.angles)
    data = templates.make(args.kind, **options)
    spec = world_from_data(data, f"template {args.kind}")
    findings = lint(spec, build_geometry(spec))
    errors = [f for f in findings if f.level == "error"]
    for f in findings:
        print(f"{args.kind}: {f}", file=sys.stderr)
    if errors:
        print(f"neurodrome new: these options make a world that does not work; {out} not written", file=sys.stderr)
        return 2
    write_atomic(out, dump_json(data))
    print(f"wrote {out} ({args.kind}, {len(spec.sites)} sites, {spec.task.trials} trials, "
          f"{len(spec.task.relocations)} relocation(s))")
    return 0


# -- check ----------------------------------------------------------------------------

def _problem_dict(p: Problem, source: str) -> dict[str, Any]:
    """Split a problem's ``where`` (``FILE $.path`` or ``FILE:line:col``) into fields."""
    rest = p.where[len(source):] if source and p.where.startswith(source) else p.where
    rest = rest.strip()
    syntax = re.fullmatch(r":(\d+):(\d+)", rest)
    return {
        "level": "error", "code": "syntax" if syntax else "invalid", "where": p.where,
        "path": rest if rest.startswith("$") else "",
        "line": int(syntax.group(1)) if syntax else None, "column": int(syntax.group(2)) if syntax else None,
        "expected": p.expected, "found": p.found,
    }


def _finding_dict(f: Finding, level: str) -> dict[str, Any]:
    return {"level": level, "code": f.code, "where": f.where, "path": f.where, "message": f.message}


def check_file(path: str, strict: bool = False) -> dict[str, Any]:
    """Validate and lint one file; a JSON-ready report (never raises on bad input)."""
    report: dict[str, Any] = {"file": path, "errors": [], "warnings": [], "summary": None}
    try:
        spec = load_world(path)
    except NeurodromeError as exc:
        report["errors"] = [_problem_dict(p, path) for p in exc.problems]
        report["ok"] = False
        return report
    try:
        geometry = build_geometry(spec)
        findings = lint(spec, geometry)
        summary = summarize(spec, geometry)
    except GEOSException as exc:  # a shapely failure on freak geometry is still the file's fault
        report["errors"] = [{"level": "error", "code": "geometry", "where": "$.corridors", "path": "$.corridors",
                             "message": f"the corridors do not make a usable floor ({exc})"}]
        report["ok"] = False
        return report
    for f in findings:
        level = "error" if (f.level == "error" or strict) else "warning"
        (report["errors"] if level == "error" else report["warnings"]).append(_finding_dict(f, level))
    report["summary"] = summary
    report["ok"] = not report["errors"]
    return report


def _fmt_values(values: list[float]) -> str:
    return " -> ".join(f"{v:g}" for v in values)


def _print_report(r: dict[str, Any]) -> None:
    n_err, n_warn = len(r["errors"]), len(r["warnings"])
    state = "ok" if r["ok"] else "FAILED"
    print(f"{r['file']}: {state} ({n_err} error{'s' * (n_err != 1)}, {n_warn} warning{'s' * (n_warn != 1)})")
    for e in r["errors"]:
        if "message" in e:
            print(f"  error: {r['file']} {e['where']}: {e['message']}")
        else:
            text = f"  error: {e['where']}: expected {e['expected']}"
            print(f"{text} (found {e['found']})" if e["found"] else text)
    for w in r["warnings"]:
        print(f"  warning: {r['file']} {w['where']}: {w['message']}")
    s = r["summary"]
    if s:
        print(f"  {s['name']}: free area {s['area_m2']:.3g} m2, {s['corridors']} corridor(s), "
              f"{s['wall_segments']} wall segments, extent {s['extent_m'][0]:.3g} x {s['extent_m'][1]:.3g} m")
        print(f"  narrowest corridor {s['narrowest_corridor_m']:g} m; widest robot reaching every site "
              f"{s['widest_robot_diameter_m']:.3g} m across (this robot {s['robot_diameter_m']:g} m, "
              f"needs +{s['clearance_margin_m']:g} m each side)")
        print(f"  {s['trials']} trials, {s['relocations']} relocation(s); sites: "
              + ", ".join(f"{site['name']} {_fmt_values(site['values'])}" for site in s["sites"]))


def cmd_check(args: argparse.Namespace) -> int:
    reports = [check_file(f, args.strict) for f in args.files]
    ok = all(r["ok"] for r in reports)
    if args.json:
        sys.stdout.write(dump_json({"ok": ok, "files": reports}))
    else:
        for r in reports:
            _print_report(r)
    return 0 if ok else 2


# -- preview --------------------------------------------------------------------------

def _parse_size(text: str) -> tuple[int, int]:
    try:
        w, h = (int(v) for v in text.lower().split("x"))
    except ValueError:
        raise WorldFileError(Problem("--size", "WIDTHxHEIGHT in pixels, e.g. 1200x900", repr(text))) from None
    if not (64 <= w <= 8192 and 64 <= h <= 8192):
        raise WorldFileError(Problem("--size", "each side from 64 to 8192 pixels", text))
    return w, h


def cmd_preview(args: argparse.Namespace) -> int:
    from ..view.scene import render_png

    size = _parse_size(args.size)
    spec = load_world(args.file)
    geometry = build_geometry(spec)
    errors = [f for f in lint(spec, geometry) if f.level == "error"]
    render_png(spec, geometry, args.output, size=size)
    print(f"wrote {args.output} ({size[0]}x{size[1]})")
    if errors:
        print(f"note: {args.file} has {len(errors)} lint error(s); run neurodrome check", file=sys.stderr)
    return 0


# -- schema ---------------------------------------------------------------------------

def _schema_of(kind: str) -> dict:
    if kind == "study":
        from ..evolve.studyfile import study_json_schema

        return study_json_schema()
    if kind == "evolver":
        from ..evolve.config import config_json_schema

        return config_json_schema()
    if kind == "network":
        from ..control.spec import network_json_schema

        return network_json_schema()
    return world_json_schema()


def cmd_schema(args: argparse.Namespace) -> int:
    text = json.dumps(_schema_of(getattr(args, "of", "world")), indent=2) + "\n"
    if args.output:
        write_atomic(args.output, text)
        print(f"wrote {args.output}")
    else:
        sys.stdout.write(text)
    return 0
