"""``workbench dossier PROJECT.wbench -o OUT.html|OUT.pdf``: the sign-off document, headless.

The project's inputs must be the files it recorded (same SHA-256): a changed or missing input
is refused (exit code 2) with the list of what changed. The computations made for the dossier
are appended to the project's audit trail and the project is saved again (atomically).
"""

from __future__ import annotations

from pathlib import Path

from workbench.commands.common import add_trust
from workbench.report.dossier import SECTIONS, write_dossier
from workbench.session.project import open_project, save_project


def register(sub) -> None:
    p = sub.add_parser("dossier", help="write the sign-off dossier of a project as HTML or PDF")
    p.add_argument("project", type=Path, help="project file (.wbench)")
    p.add_argument("-o", "--output", type=Path, required=True, help="OUT.html or OUT.pdf")
    p.add_argument("--sections", help="comma-separated sections to include (default: the "
                                      f"project's choice, or all): {', '.join(k for k, _ in SECTIONS)}")
    p.add_argument("--with-h", action="store_true",
                   help="also compute the interaction matrix (Friedman's H; slower)")
    p.add_argument("--no-save", action="store_true",
                   help="do not write the audit entries back into the project file")
    add_trust(p)
    p.set_defaults(run=run)


def run(args) -> int:
    project = open_project(args.project)
    sections = [s.strip() for s in args.sections.split(",") if s.strip()] if args.sections else None
    out = write_dossier(project, args.output, trust=args.trust, sections=sections,
                        h_matrix=args.with_h)
    if not args.no_save:
        save_project(project)
    print(f"dossier written to {out}")
    return 0
