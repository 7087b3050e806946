"""Type stubs for the Rust extension (retake._native)."""

import os
from typing import Any, Callable, Dict, List, Optional, Sequence, Tuple, Union

import numpy as np
import numpy.typing as npt

_Path = Union[str, "os.PathLike[str]"]
Record = Dict[str, Any]

__version__: str

class RetakeError(Exception):
    """Base of every error the package raises."""

class RecipeError(RetakeError):
    """A recipe that cannot be used."""
    file: Optional[str]
    line: Optional[int]
    field: Optional[str]
    step: Optional[int]

class ClipError(RetakeError):
    """A clip no take can be made of; `kind` is "labels", "audio", "step" or "take"."""
    kind: str
    file: Optional[str]
    line: Optional[int]
    field: Optional[str]

class ManifestError(RetakeError):
    """A manifest that cannot be read or written."""
    file: Optional[str]
    line: Optional[int]
    field: Optional[str]

class RunError(RetakeError):
    """A batch run that could not go on."""

class Recipe:
    """A checked recipe: the plan `retake run` would follow."""
    @staticmethod
    def load(path: _Path) -> "Recipe":
        """Read and check a recipe file, exactly as `retake run` does."""
    @staticmethod
    def from_toml(text: str, folder: Optional[_Path] = None, name: str = "<string>") -> "Recipe":
        """Check a recipe given as TOML text; relative paths resolve against `folder`."""
    @property
    def seed(self) -> int: ...
    @property
    def takes(self) -> int: ...
    @property
    def rate(self) -> int: ...
    @property
    def keep_source(self) -> bool: ...
    @property
    def format(self) -> str: ...
    @property
    def steps(self) -> List[str]: ...
    @property
    def warnings(self) -> List[str]: ...
    @property
    def path(self) -> str: ...
    def make_take(
        self,
        samples: npt.ArrayLike,
        rate: int,
        clip_id: str,
        lines: Optional[Sequence[Record]] = None,
        text: Optional[str] = None,
        k: int = 0,
    ) -> "Take":
        """Take `k` of a clip given as mono samples at `rate` Hz with its labels."""
    def take_of(self, record: Record, k: int = 0, base: Optional[_Path] = None) -> "Take":
        """Take `k` of a manifest record; its audio is decoded by the library's decoder."""

class Take:
    """One take: samples at the recipe's rate and the manifest record `retake run` writes."""
    @property
    def samples(self) -> npt.NDArray[np.float32]: ...
    @property
    def rate(self) -> int: ...
    @property
    def k(self) -> int: ...
    @property
    def duration(self) -> float: ...
    @property
    def record(self) -> Record: ...
    @property
    def lines(self) -> Optional[List[Record]]: ...
    @property
    def text(self) -> Optional[str]: ...
    @property
    def origin(self) -> Record: ...
    @property
    def stems(self) -> Dict[str, npt.NDArray[np.float32]]: ...
    def frame_targets(self, hop: float) -> Dict[str, Any]:
        """Per-frame `line`, `word` (int32, -1 outside) and `obscured` (float32) arrays."""
    def write(self, path: _Path, format: Optional[str] = None) -> None:
        """Write the samples in an output format ("pcm16", "pcm24", "float32", "flac16", "flac24"; the recipe's by default)."""

class Corpus:
    """The clips of a manifest, by index, with errors naming the manifest line."""
    def __init__(self, path: _Path) -> None: ...
    def __len__(self) -> int: ...
    @property
    def path(self) -> str: ...
    @property
    def ids(self) -> List[str]: ...
    def take(self, recipe: Recipe, i: int, k: int) -> Take:
        """Take `k` of clip `i` (manifest order)."""

def read_manifest(path: _Path) -> List[Record]:
    """Read a manifest; each record's `audio` is an absolute path."""

def write_manifest(path: _Path, records: Sequence[Record]) -> None:
    """Check each record as a manifest line and write them all, atomically."""

def run(
    recipe: Recipe,
    manifest: _Path,
    out: _Path,
    threads: Optional[int] = None,
    progress: Optional[Callable[[int, int, bool], Any]] = None,
    max_clip_memory: int = 4096,
) -> Dict[str, Any]:
    """Run a whole batch, exactly as `retake run`; returns the summary figures.

    `max_clip_memory` (MiB, as `--max-clip-memory`): a clip that would need more in one
    worker is a reject pointing at `retake slice`."""

def decode(path: _Path, channels: Union[str, int, None] = None) -> Tuple[npt.NDArray[np.float32], int]:
    """Decode an audio file with the library's decoder, as (mono samples, rate)."""
