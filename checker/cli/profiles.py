"""``deliverycheck profiles [show NAME | validate FILE]``: list, show and validate profiles."""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING, TextIO

from checker.model.errors import EXIT_OK

if TYPE_CHECKING:
    from checker.profile.load import Profile
# The profile modules load where a command runs (not for --help or another command).


def add_parser(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        "profiles",
        help="list, show or validate delivery profiles",
        description="Without arguments: list the built-in profiles with one line each.",
    )
    actions = p.add_subparsers(dest="profiles_action", metavar="ACTION")
    show = actions.add_parser(
        "show", help="show one profile, resolved, with the source of every limit"
    )
    show.add_argument("name", metavar="NAME", help="built-in profile name or path to a .toml file")
    check = actions.add_parser("validate", help="check a profile file and report the first error")
    check.add_argument("file", metavar="FILE", help="path to a .toml profile")
    return p


def _list(out: TextIO) -> int:
    from checker.profile.load import list_profiles

    profiles = list_profiles()
    width = max(len(p.name) for p in profiles)
    for p in profiles:
        print(f"{p.name:<{width}}  {p.description}", file=out)
    print("\nshow one with: deliverycheck profiles show NAME", file=out)
    return EXIT_OK


def describe(profile: Profile) -> list[str]:
    """The resolved profile as text lines: metadata, then each section's limits with sources."""
    from checker.profile.catalogue import SECTIONS

    lines = [
        f"{profile.title}  ({profile.name}, version {profile.version})",
        f"  {profile.description}" if profile.description else "",
        f"  file: {profile.path}",
    ]
    if len(profile.lineage) > 1:
        lines.append("  inherits: " + " -> ".join(profile.lineage))
    mono = "as dual mono" if profile.mono_loudness == "dual_mono" else "as one channel"
    lines.append(f"  mono files judged {mono} (mono_loudness = {profile.mono_loudness})")
    lines.append(
        f"  head and tail silence below {profile.silence_threshold_dbfs:g} dBFS short-time RMS "
        f"(silence_threshold_dbfs; {profile.silence_threshold_source})"
    )
    lines = [x for x in lines if x]
    if not profile.limits:
        lines.append("  no limits: every measured file passes")
        return lines
    rows = profile.limits_table()
    for section in SECTIONS:
        sec = [r for r in rows if r["section"] == section]
        if not sec:
            continue
        lines.append(f"  [{section}]")
        kw = max(len(r["key"]) for r in sec)
        tw = max(len(r["text"]) for r in sec)
        for r in sec:
            lines.append(
                f"    {r['key']:<{kw}}  {r['text']:<{tw}}  {r['severity']:<4}  {r['source']}"
            )
    return lines


def run(args, out: TextIO, err: TextIO) -> int:
    from checker.profile.load import load_profile, validate_profile_file

    action = getattr(args, "profiles_action", None)
    if action == "show":
        for line in describe(load_profile(args.name)):
            print(line, file=out)
        return EXIT_OK
    if action == "validate":
        p = validate_profile_file(args.file)
        print(f"{args.file}: valid profile {p.name} ({len(p.limits)} limits)", file=out)
        return EXIT_OK
    return _list(out)
