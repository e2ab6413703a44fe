"""Regenerate the gallery of the README's figures in examples/gallery/ (run after changing the figures).

    python examples/make_gallery.py [--quick] [--output-dir DIR]

- ``ferrite-carbon.png``: the README's main job (Set-up), carbon in ferrite from 500 K to 1150 K against every
  phase of the bundled Fe-C database but graphite and diamond (the metastable Fe-Fe3C diagram);
- ``austenite-carbon.png``: the README's austenite example (Solvus), 1000 K to 1450 K, same partners.

``--quick`` uses a coarse temperature step (a check that everything runs) and writes nothing into the gallery
unless --output-dir says so.
"""

from __future__ import annotations

import argparse
import json
import tempfile
from pathlib import Path

import solubility
from solubility.results.plotting import save_solvus_figure

GALLERY = Path(__file__).with_name("gallery")
METASTABLE = ["GRAPHITE", "DIAMOND_A4"]
#: (file, host phase, temperatures in K, display names)
FIGURES = [
    ("ferrite-carbon.png", "BCC_A2", "500:1150:10", {"BCC_A2": "ferrite"}),
    ("austenite-carbon.png", "FCC_A1", "1000:1450:25", {"FCC_A1": "austenite"}),
]


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="coarse temperature steps, written to a temp folder")
    parser.add_argument("--output-dir", type=Path, help="folder for the figures (default: examples/gallery)")
    args = parser.parse_args(argv)
    out = args.output_dir or (Path(tempfile.mkdtemp(prefix="gallery-")) if args.quick else GALLERY)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name, phase, temperatures, labels in FIGURES:
        if args.quick:
            start, stop, _ = temperatures.split(":")
            temperatures = f"{start}:{stop}:50"
        ds = solubility.solvus("fe-c", phase, "C", temperatures, exclude=METASTABLE)
        written.append(str(save_solvus_figure(ds, out / name, labels=labels)))
    print(json.dumps({"figures": written}))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
