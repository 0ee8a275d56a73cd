"""The JSON material descriptor: what a bake wrote, with checksums, bands, units, targets and provenance.

The descriptor (``material.json``, or ``material.<UDIM>.json`` for a one-tile farm bake) is validated
against its published JSON Schema, ``matgen/export/schema/material_descriptor.schema.json`` (format version
1), before it is written. Texture paths are POSIX paths relative to the descriptor's folder, never absolute
and never through ``..``; each carries the SHA-256 of its bytes. :func:`inspect_descriptor` checks that every
texture exists and matches its checksum. Units: wavelengths in nm, lengths in mm; renderer-target lengths in
scene units (``units.metres_per_scene_unit`` metres each).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path, PurePosixPath

import jsonschema

from matgen.errors import ConfigError, DataError, PathError
from matgen.fsutil import resolve_inside
from matgen.limits import read_text_limited
from matgen.provenance import sha256_file

#: Format name and version of descriptors written by this matgen.
DESCRIPTOR_FORMAT = "matgen-material"
DESCRIPTOR_VERSION = 1


def descriptor_schema() -> dict:
    """Return the descriptor's JSON Schema (draft 2020-12), as shipped in the package."""
    text = resources.files("matgen.export").joinpath("schema", "material_descriptor.schema.json").read_text()
    return json.loads(text)


def validate_descriptor(doc: dict, where: str = "material descriptor") -> None:
    """Validate ``doc`` against the schema and check that every path stays inside the folder.

    Raises
    ------
    ConfigError
        On a schema violation (the message names the field).
    PathError
        On an absolute path or one that leaves the folder.

    """
    validator = jsonschema.Draft202012Validator(descriptor_schema())
    errors = sorted(validator.iter_errors(doc), key=lambda e: list(e.absolute_path))
    if errors:
        e = errors[0]
        loc = ".".join(str(p) for p in e.absolute_path) or "(top level)"
        raise ConfigError(f"{where}: field '{loc}': {e.message}")
    for tex in doc["textures"]:
        p = PurePosixPath(tex["path"])
        if p.is_absolute() or ".." in p.parts:
            raise PathError(
                f"{where}: texture path '{tex['path']}' must be relative and inside the output folder"
            )


def texture_entry(
    spec, rel_path: str, file_path: Path, tile, width: int, height: int, pixel_type: str, tiled: bool
) -> dict:
    """Return the descriptor entry of one written texture (checksum computed from the file's bytes)."""
    return {
        "key": spec.key,
        "kind": spec.kind,
        "quantity": spec.quantity,
        "path": str(PurePosixPath(rel_path)),
        "sha256": sha256_file(file_path),
        "bytes": int(Path(file_path).stat().st_size),
        "udim": None if tile is None else int(tile),
        "width": int(width),
        "height": int(height),
        "channels": list(spec.channels),
        "unit": spec.unit,
        "pixel_type": pixel_type,
        "tiled_mipmapped": bool(tiled),
        "description": spec.description,
    }


def descriptor_json(doc: dict) -> str:
    """Validate a descriptor and return it as indented JSON text."""
    validate_descriptor(doc)
    return json.dumps(doc, indent=1) + "\n"


def load_descriptor(path) -> dict:
    """Read and validate a descriptor file."""
    path = Path(path)
    if not path.is_file():
        raise DataError(f"material descriptor {path} does not exist")
    text = read_text_limited(path, "material descriptor")
    try:
        doc = json.loads(text)
    except ValueError as exc:
        raise ConfigError(f"{path}: not valid JSON ({exc})") from exc
    validate_descriptor(doc, str(path))
    return doc


@dataclass
class InspectReport:
    """Result of :func:`inspect_descriptor`: the descriptor, and textures missing or not matching."""

    path: Path
    doc: dict
    missing: list = field(default_factory=list)
    modified: list = field(default_factory=list)
    checked: int = 0

    @property
    def ok(self) -> bool:
        """True when every texture exists and matches its checksum."""
        return not self.missing and not self.modified


def inspect_descriptor(path) -> InspectReport:
    """Check that every texture (and document) a descriptor lists exists and matches its SHA-256.

    Parameters
    ----------
    path : str or Path
        The descriptor file; texture paths are relative to its folder.

    Returns
    -------
    InspectReport

    """
    path = Path(path)
    doc = load_descriptor(path)
    rep = InspectReport(path, doc)
    entries = list(doc["textures"]) + list(doc.get("documents", {}).values())
    for entry in entries:
        try:
            full = resolve_inside(path.parent, entry["path"], "texture path")
        except PathError:
            rep.missing.append(entry["path"])
            continue
        if not full.is_file():
            rep.missing.append(entry["path"])
            continue
        rep.checked += 1
        if sha256_file(full) != entry["sha256"]:
            rep.modified.append(entry["path"])
    return rep


def summary_lines(rep: InspectReport) -> list:
    """Human-readable summary of a descriptor and of the checks of :func:`inspect_descriptor`."""
    d = rep.doc
    kinds = {}
    for t in d["textures"]:
        kinds.setdefault(t["kind"], set()).add(t["key"])
    bands = d["bands"]["spectral_stacks"]["centre_nm"]
    lines = [
        f"material '{d['name']}' ({d['format']} v{d['format_version']}, "
        f"matgen {d['provenance']['matgen_version']})",
        f"  working space {d['working_space']}, illuminant {d['illuminant']}, "
        f"{d['units']['metres_per_scene_unit']:g} m per scene unit",
        f"  UDIM tiles: {', '.join(map(str, d['udim_tiles'])) if d['udim_tiles'] else 'single texture'}",
        f"  spectral stacks: {len(bands)} bands {bands[0]:g}-{bands[-1]:g} nm",
    ]
    for kind in ("spectral", "rgb", "target", "pass", "qa"):
        if kind in kinds:
            lines.append(f"  {kind}: {', '.join(sorted(kinds[kind]))}")
    lines.append(f"  targets: {', '.join(d['targets']) or 'none'}")
    s = d["statistics"]
    lines.append(
        f"  texels {s.get('texels', 0)}, clamped to table {s.get('table_clamped_texels', 0)}, "
        f"clamped to encoding {s.get('encoding_clamped_texels', 0)}"
    )
    n = len(d["textures"]) + len(d.get("documents", {}))
    lines.append(
        f"  files: {n} listed, {rep.checked} present, {len(rep.missing)} missing, "
        f"{len(rep.modified)} modified"
    )
    for p in rep.missing:
        lines.append(f"  MISSING  {p}")
    for p in rep.modified:
        lines.append(f"  MODIFIED {p} (SHA-256 differs from the descriptor)")
    return lines
