"""The demo plant's configuration pointed at a simulated historian in a test folder."""

from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "config" / "demo_plant.toml"
SOURCE = '''[source]
kind = "sqlite"
path = "../sample_historian/generated/calder_bank.sqlite"
table = "readings"
good_quality = ["OK"]'''


def _swap(text: str, old: str, new: str) -> str:
    assert old in text, f"the demo config no longer holds {old!r}"
    return text.replace(old, new)


def demo_config(folder: Path, sqlite=None, *, source_block: str | None = None, store_url: str | None = None,
                name: str = "plant") -> Path:
    """Write ``<folder>/<name>.toml``: the demo config reading ``sqlite`` (or ``source_block``),
    writing its outputs to ``<folder>/<name>-out`` and its store to ``store_url`` (default there too)."""
    folder = Path(folder)
    out = folder / f"{name}-out"
    text = DEMO.read_text()
    if source_block is not None:
        text = _swap(text, SOURCE, source_block)
    else:
        text = _swap(text, 'path = "../sample_historian/generated/calder_bank.sqlite"', f'path = "{sqlite}"')
    text = _swap(text, 'output_dir = "../out"', f'output_dir = "{out}"')
    text = _swap(text, 'url = "sqlite:///../out/results.sqlite"',
                 f'url = "{store_url or f"sqlite:///{out}/results.sqlite"}"')
    cfg = folder / f"{name}.toml"
    cfg.write_text(text)
    return cfg
