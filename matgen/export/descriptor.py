"""The JSON material descriptor: what a bake wrote, with checksums, bands, units, targets and provenance.

The descriptor (``material.json``, or ``material.<UDIM>.json`` for a one-tile farm bake) is validated
against its published JSON Schema, ``matgen/export/schema/material_descriptor.schema.json`` (format version
2), before it is written. Texture paths are POSIX paths relative to the descriptor's folder, never absolute
and never through ``..``; each carries the SHA-256 of its bytes. :func:`inspect_descriptor` checks that every
texture exists and matches its checksum. A one-tile descriptor of a bake with a preview scene also records
``statistics.output_sums`` (per output, the sum of its texels per channel over the tile), from which
:func:`matgen.export.assemble.assemble_tiles` forms the set's mean texel. Units: wavelengths in nm, lengths
in mm; renderer-target lengths in scene units (``units.metres_per_scene_unit`` metres each).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path, PurePosixPath

import jsonschema

from matgen.cautions import IMAGERY_ONLY
from matgen.errors import ConfigError, DataError, PathError
from matgen.fsutil import resolve_inside, strict_json
from matgen.limits import read_text_limited
from matgen.provenance import hash_json, sha256_file

#: Format name and version of descriptors written by this matgen.
DESCRIPTOR_FORMAT = "matgen-material"
DESCRIPTOR_VERSION = 2


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


#: Checksum of a texture that a dry run plans but has not written (the descriptor is only validated, never
#: written with it).
PLANNED_SHA256 = "0" * 64


def texture_entry(
    spec, rel_path: str, file_path: Path | None, tile, width: int, height: int, pixel_type: str, tiled: bool
) -> dict:
    """Return the descriptor entry of one texture.

    The checksum and size come from the file's bytes; with ``file_path=None`` (a dry run: the texture is
    planned, not written) they are the placeholders :data:`PLANNED_SHA256` and 1 byte, so that the rest
    of the descriptor can be validated against the schema.
    """
    return {
        "key": spec.key,
        "kind": spec.kind,
        "quantity": spec.quantity,
        "path": str(PurePosixPath(rel_path)),
        "sha256": PLANNED_SHA256 if file_path is None else sha256_file(file_path),
        "bytes": 1 if file_path is None else int(Path(file_path).stat().st_size),
        "udim": None if tile is None else int(tile),
        "width": int(width),
        "height": int(height),
        "channels": list(spec.channels),
        "unit": spec.unit,
        "pixel_type": pixel_type,
        "tiled_mipmapped": bool(tiled),
        "description": spec.description,
    }


def _texture_pattern(plan, spec) -> str:
    """Relative map path of an output as a renderer reads it: ``<UDIM>`` in place of the tile of a set."""
    return f"{spec.key}.<UDIM>.exr" if plan.tile_numbers[0] is not None else f"{spec.key}.exr"


def renderer_targets(plan, ior: float | None) -> dict:
    """Return the descriptor's ``targets``: per renderer target of the config, its inputs (maps or constants).

    Every entry comes from the target itself (:mod:`matgen.targets`): the maps it wrote and the consumer
    input each feeds, its constants (index, weight), its colour convention and the remap by which the
    consumer rebuilds the medium; maps wired to no input are listed under ``reference_maps``.

    Parameters
    ----------
    plan : matgen.bake.run.BakePlan
        The bake's plan (its target outputs, options and tiles).
    ior : float or None
        The table's boundary refractive index, None when the table has none.

    Returns
    -------
    dict
        Target name -> ``{"shading_model", "node", "albedo_convention", ..., "inputs", "reference_maps"}``.

    """
    from matgen.targets import get_target

    targets = {}
    opts = plan.target_options
    for name in plan.config.outputs.targets:
        target = get_target(name)
        specs = {spec.quantity: spec for spec in plan.outputs if spec.target == name}
        inputs, reference = {}, {}
        for m in target.maps(opts):
            spec = specs[m.name]
            entry = {
                "texture": _texture_pattern(plan, spec),
                "unit": m.unit,
                "type": m.mtlx_type or "spectral_stack",
                "colour_managed": m.colour,
            }
            if m.input is None:
                reference[m.name] = entry
            else:
                inputs[m.input] = entry
        if ior is not None:
            inputs.update(target.constant_inputs(ior, opts))
        conv = {k: v for k, v in target.conventions(opts).items() if k != "inputs_extra"}
        targets[name] = {
            "shading_model": target.shading_model,
            "node": target.node,
            **conv,
            "inputs": inputs,
            **({"reference_maps": reference} if reference else {}),
        }
    return targets


def shader_inputs(targets: dict) -> list:
    """Return ``[(node category, inputs)]`` of the targets that have a MaterialX node.

    Inputs map a name to ``{"texture" or "value", "type", "colour_managed"}``.
    """
    out = []
    for entry in targets.values():
        if entry.get("node"):
            inputs = {
                k: {kk: vv for kk, vv in v.items() if kk in ("texture", "value", "type", "colour_managed")}
                for k, v in entry["inputs"].items()
            }
            out.append((entry["node"], inputs))
    return out


def build_descriptor(
    plan,
    table,
    *,
    matgen_version: str,
    table_identity: tuple,
    spectra_provenance,
    textures: list,
    targets: dict,
    documents: dict,
    table_clamped: int,
    encoding_clamped: int,
    output_sums: dict | None = None,
) -> dict:
    """Assemble a descriptor (not yet validated) from a bake's plan, table and written files.

    Parameters
    ----------
    plan : matgen.bake.run.BakePlan
        The bake's plan (config, tiles, spectral bands, pass weights).
    table : matgen.tables.store.Table
        The table used (bands, working space, illuminant, manifest).
    matgen_version : str
        Version of matgen that baked.
    table_identity : tuple of str
        (name, SHA-256) of the table.
    spectra_provenance : object
        Where the table's spectra came from (from its manifest).
    textures : list of dict
        Entries of :func:`texture_entry`, in tile order then output order.
    targets : dict
        From :func:`renderer_targets`.
    documents : dict
        Name -> ``{"path", "sha256"}`` of the documents written beside the textures.
    table_clamped, encoding_clamped : int
        Texels clamped to the table's range and to the encoding range.
    output_sums : dict, optional
        Output key -> per-channel sum of its texels over the descriptor's tiles (recorded by one-tile farm
        bakes so that the tiles' preview scene can be assembled).

    Returns
    -------
    dict

    """
    cfg = plan.config
    source = dict(cfg.source)
    statistics = {
        "texels": int(plan.texels),
        "table_clamped_texels": int(table_clamped),
        "encoding_clamped_texels": int(encoding_clamped),
    }
    if output_sums:
        statistics["output_sums"] = {k: [float(x) for x in v] for k, v in output_sums.items()}
    return {
        "format": DESCRIPTOR_FORMAT,
        "format_version": DESCRIPTOR_VERSION,
        "name": cfg.name,
        "caution": IMAGERY_ONLY,
        "units": {
            "wavelength": "nm",
            "length": "mm",
            "scene_length": "scene_unit",
            "metres_per_scene_unit": cfg.metres_per_scene_unit,
        },
        "bands": {"table": table.bands.to_dict(), "spectral_stacks": plan.spectral_bands.to_dict()},
        "working_space": table.working_space,
        "illuminant": table.illuminant,
        "udim_tiles": None if plan.tile_numbers[0] is None else [int(t) for t in plan.tile_numbers],
        "textures": textures,
        "passes": {
            k: {"weights": v.tolist(), "curves": getattr(plan, "pass_curves", {}).get(k, [])}
            for k, v in plan.pass_weights.items()
        },
        "targets": targets,
        "documents": documents,
        "provenance": {
            "matgen_version": matgen_version,
            "table": table_identity[0],
            "table_sha256": table_identity[1],
            "table_manifest": {
                k: v for k, v in (table.manifest or {}).items() if k in ("spec", "spec_hash", "name", "hash")
            },
            "spectra": spectra_provenance,
            "config": source,
            "config_sha256": hash_json(source),
        },
        "statistics": statistics,
    }


def descriptor_json(doc: dict) -> str:
    """Validate a descriptor and return it as indented JSON text."""
    validate_descriptor(doc)
    return strict_json(doc, "the material descriptor", indent=1) + "\n"


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
    except RecursionError:  # nesting deeper than the parser's stack
        raise ConfigError(f"{path}: JSON nested too deeply to be a material descriptor") from None
    if isinstance(doc, dict) and doc.get("format_version") != DESCRIPTOR_VERSION:
        raise ConfigError(
            f"{path}: descriptor format version {doc.get('format_version')!r}; this matgen reads version "
            f"{DESCRIPTOR_VERSION} (bake the material again)"
        )
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
