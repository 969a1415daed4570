"""The provenance file of a report: versions, the input, settings and the commands."""

from __future__ import annotations

from ..provenance import command_line, versions


def provenance(result, argv) -> dict:
    """Versions of this run, the input and its checksum, settings, and how to rerun it.

    ``command`` reproduces the analysis (as recorded in the result);
    ``report_command`` is the command that wrote this report folder.
    """
    return {
        "versions": result.provenance.get("versions") or versions(),
        "input_path": result.input.get("path"),
        "input_sha256": result.input.get("sha256"),
        "settings": result.settings.to_dict(),
        "settings_sha256": result.settings.hash(),
        "command": result.provenance.get("command"),
        "report_command": command_line(argv),
    }
