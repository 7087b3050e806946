"""retake in a training script: the same takes `retake run` writes, made in-process.

A recipe is checked exactly as the command line checks it; a take is made by the same
library function the batch engine calls, so samples, rewritten labels and ``origin`` agree
with ``retake run`` bit for bit.

>>> import retake
>>> recipe = retake.Recipe.from_toml('takes = 2\\n[[step]]\\ndo = "gain"\\ndb = -6\\n')
>>> recipe.takes, recipe.steps
(2, ['gain'])
"""

from ._native import (
    ClipError,
    Corpus,
    ManifestError,
    Recipe,
    RecipeError,
    RetakeError,
    RunError,
    Take,
    __version__,
    decode,
    read_manifest,
    run,
    write_manifest,
)
from .dataset import TakeDataset

__all__ = [
    "ClipError",
    "Corpus",
    "ManifestError",
    "Recipe",
    "RecipeError",
    "RetakeError",
    "RunError",
    "Take",
    "TakeDataset",
    "__version__",
    "decode",
    "read_manifest",
    "run",
    "write_manifest",
]
