"""Write the invented "Low Tide Lantern" pigment maps (maps/melanin.exr, maps/blood.exr) beside this script.

The maps are procedural and seeded (matgen.scenario); the character is invented. Then bake them with

    python scenes/low_tide_lantern/make_maps.py --size 512
    matgen bake scenes/low_tide_lantern/material.toml --out lowtide_bake
"""

import argparse
from pathlib import Path

from matgen.scenario import DEFAULT_SEED, write_scenario

parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
parser.add_argument("--size", type=int, default=512, help="map side in texels")
parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="noise seed")
args = parser.parse_args()
config, _ = write_scenario(Path(__file__).resolve().parent, size=args.size, seed=args.seed)
print(f"wrote {config.parent / 'maps'} and {config}")
