"""Start-up: ``headcount analyze`` wall time against importing torch and transformers alone.

Run: .venv/bin/python -m bench.bench_startup [--repeats N] [--threads N]
 or: .venv/bin/python bench/bench_startup.py

Each command runs in a fresh process (so every import is paid), in alternation, and
the median wall time of each is printed:

* ``python -c "import torch, transformers"``: the floor any command that runs a
  model pays;
* ``transformers alone``: a plain transformers script that loads the same checkpoint
  and tokenizer and predicts the same sentence (importing transformers' modelling
  code, which pulls in much of torch, is most of its cost); the difference between
  ``analyze`` and this is Headcount's own start-up and analysis;
* ``headcount --help``: must not import the model libraries at all;
* ``headcount analyze SAMPLE_MODEL --text ...`` (``--json``): the whole command,
  model loading and one analysed sentence included.

Target (tracker issue): the difference between ``analyze`` and the bare import stays
small. The sample model is used when it is built, else a random model of its shape.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # also run as a script

from bench.common import SAMPLE_SHAPE, load_note, random_bert_classifier  # noqa: E402
from inspector.paths import PROJECT_ROOT, SAMPLE_MODEL, sample_model_available  # noqa: E402

TEXT = "hi, I booked the 07:30 crossing from Port Averly but need to move it to Friday with my van"


def wall(cmd: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, cwd=PROJECT_ROOT, check=True, capture_output=True)
    return time.perf_counter() - t0


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--threads", type=int, default=None, help="passed to headcount analyze")
    args = parser.parse_args()
    launcher = [
        sys.executable,
        "-c",
        "import sys; from ui.launcher import main; raise SystemExit(main(sys.argv[1:]))",
    ]
    with tempfile.TemporaryDirectory() as tmp:
        if sample_model_available():
            model, note = SAMPLE_MODEL, "sample model"
        else:
            labels = [f"intent_{i}" for i in range(16)]
            model = random_bert_classifier(Path(tmp) / "sample_sized", labels, **SAMPLE_SHAPE)
            note = "random model of the sample's shape"
        threads = [] if args.threads is None else ["--threads", str(args.threads)]
        plain = (
            "import sys, torch, transformers as t\n"
            "m = t.AutoModelForSequenceClassification.from_pretrained(sys.argv[1], local_files_only=True)\n"
            "k = t.AutoTokenizer.from_pretrained(sys.argv[1], local_files_only=True)\n"
            "with torch.no_grad():\n"
            "    print(m(**k([sys.argv[2]], return_tensors='pt')).logits.argmax(-1))\n"
        )
        commands = {
            "import torch, transformers": [sys.executable, "-c", "import torch, transformers"],
            "transformers alone": [sys.executable, "-c", plain, str(model), TEXT],
            "headcount --help": [*launcher, "--help"],
            "headcount analyze": [*launcher, "analyze", str(model), "--text", TEXT, "--json", *threads],
        }
        for cmd in commands.values():  # warm the file cache
            wall(cmd)
        times: dict[str, list[float]] = {k: [] for k in commands}
        for _ in range(args.repeats):
            for name, cmd in commands.items():
                times[name].append(wall(cmd))
    med = {k: statistics.median(v) for k, v in times.items()}
    base = med["import torch, transformers"]
    print(f"fresh process per run, median of {args.repeats}; model: {note}")
    for name, t in med.items():
        print(f"  {name:<28} {t:6.2f} s   ({t - base:+.2f} s against the import)")
    own = med["headcount analyze"] - med["transformers alone"]
    print(f"  analyze / import            {med['headcount analyze'] / base:6.2f}x")
    print(f"  Headcount's own share (analyze - transformers alone): {own:+.2f} s")
    print(load_note())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
