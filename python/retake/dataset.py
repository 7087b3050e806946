"""A map-style dataset of takes over a manifest and a recipe.

Item ``i`` is take ``j = i % per_clip`` of clip ``i // per_clip`` (manifest order). Its take
index, and so its seed, follows from the epoch: ``epoch * per_clip + j``, except that with
``keep_source = true`` item ``j = 0`` is the untouched source (take 0) in every epoch. The
same (recipe seed, clip id, take index) always gives the same take, in any process, so a
``DataLoader`` with any number of workers, forked or spawned, sees the same items; a new
epoch (``set_epoch``) gives fresh takes. Epoch 0 gives exactly the takes of ``retake run``.

No torch import is needed: the dataset has ``__len__`` and ``__getitem__``, which is all a
``torch.utils.data.DataLoader`` asks of a map-style dataset.
"""

from __future__ import annotations

import os
from typing import Any, Dict, Optional, Union

from ._native import Corpus, Recipe

PathLike = Union[str, "os.PathLike[str]"]


class TakeDataset:
    """Takes of the clips of ``manifest`` under ``recipe``, made on demand.

    ``per_clip`` takes of each clip per epoch (the recipe's ``takes`` when not given).
    With ``frame_hop`` (seconds) every item also carries frame-level targets
    (``Take.frame_targets``).
    """

    def __init__(
        self,
        manifest: PathLike,
        recipe: Union[Recipe, PathLike],
        *,
        epoch: int = 0,
        per_clip: Optional[int] = None,
        frame_hop: Optional[float] = None,
    ) -> None:
        self.recipe = recipe if isinstance(recipe, Recipe) else Recipe.load(recipe)
        self.corpus = Corpus(manifest)
        self.per_clip = int(per_clip if per_clip is not None else self.recipe.takes)
        if self.per_clip < 1:
            raise ValueError(f"per_clip must be at least 1, not {self.per_clip}")
        if frame_hop is not None and not frame_hop > 0:
            raise ValueError(f"frame_hop must be a positive number of seconds, not {frame_hop}")
        self.frame_hop = frame_hop
        self.set_epoch(epoch)

    def set_epoch(self, epoch: int) -> None:
        """Make the next items from epoch ``epoch``'s takes (call before each epoch)."""
        if epoch < 0:
            raise ValueError(f"epoch must not be negative, not {epoch}")
        self.epoch = int(epoch)

    def take_index(self, j: int) -> int:
        """The take index item ``j`` of a clip has in the current epoch."""
        if j == 0 and self.recipe.keep_source:
            return 0
        return self.epoch * self.per_clip + j

    def __len__(self) -> int:
        return len(self.corpus) * self.per_clip

    def __getitem__(self, i: int) -> Dict[str, Any]:
        n = len(self)
        if i < 0:
            i += n
        if not 0 <= i < n:
            raise IndexError(f"item {i} of {n}")
        clip, j = divmod(i, self.per_clip)
        take = self.corpus.take(self.recipe, clip, self.take_index(j))
        item: Dict[str, Any] = {
            "samples": take.samples,
            "rate": take.rate,
            "id": take.record["id"],
            "text": take.text,
            "record": take.record,
        }
        if self.frame_hop is not None:
            item["frames"] = take.frame_targets(self.frame_hop)
        return item

    def __repr__(self) -> str:
        return (
            f"TakeDataset({len(self.corpus)} clips x {self.per_clip} takes, "
            f"epoch {self.epoch}, recipe {self.recipe.path})"
        )
