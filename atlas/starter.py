"""``atlas new DIR``: a small starter atlas to copy from.

Everything in it is invented (six carved wooden spoons from three invented hamlets) and says
so; it exists to show the shape of each input file and builds as it is.
"""

from __future__ import annotations

from pathlib import Path

from .errors import AtlasError, Problem

FILES: dict[str, str] = {
    "atlas.toml": """\
# A starter atlas. Everything here is invented; replace it with your study.
title = "Starter atlas: carved spoons (invented example)"
languages = ["en"]
licence = "CC-BY-4.0"

[sources]
trees = "trees.nex"
matrix = "matrix.csv"
gazetteer = "places.csv"

[analysis]
burnin = 0.25
outgroup = ["spoon-f"]
summary = "majority"
model = "mk"
rates = "equal"
seed = 1

[profiles.public]
access = ["public"]

[profiles.community]
access = ["public", "community"]

[profiles.kiosk]
access = ["public"]
kiosk = true
""",
    "trees.nex": """\
#NEXUS
[Four invented trees; the first is dropped as burn-in.]
BEGIN TREES;
  TRANSLATE
    1 spoon-a,
    2 spoon-b,
    3 spoon-c,
    4 spoon-d,
    5 spoon-e,
    6 spoon-f;
  TREE t1 = [&R] (((1:1,3:1):1,(2:1,4:1):1):1,(5:1,6:1):1);
  TREE t2 = [&R] ((((1:1,2:1):1,3:1):1,(4:1,5:1):1):1,6:2);
  TREE t3 = [&R] ((((1:1,2:1):1,3:1):1,(4:1,5:1):1):1,6:2);
  TREE t4 = [&R] ((((1:1,2:1):1,(3:1,4:1):1):1,5:1):1,6:2);
END;
""",
    "matrix.csv": """\
object,bowl,handle,hook,notch
spoon-a,0,1,1,0
spoon-b,0,1,1,?
spoon-c,0,1,0,0
spoon-d,1,0,0,1
spoon-e,1,0,-,1
spoon-f,2,0,-,0/1
""",
    "places.csv": """\
id,name,lat,lon,precision,access
brinmoor,Brinmoor (invented),-31.52,-15.41,exact,public
calder-end,Calder End (invented),-31.80,-15.05,exact,public
old-fold,The Old Fold (invented),-32.10,-14.70,generalised,public
""",
    "objects/spoon-a.md": """\
---
id: spoon-a
title: Spoon with hooked handle
place: brinmoor
period: "invented, c. 1900"
community: Brinmoor carvers (invented)
access: public
sources:
  - "Field notebook 1, p. 4 (invented)"
---
A long-handled spoon whose handle ends in a hook for hanging. **Everything about this
object is invented** to show what an object note looks like.
""",
    "objects/spoon-d.md": """\
---
id: spoon-d
title: Deep spoon with notched rim
place: calder-end
access: public
---
A deep-bowled spoon with a small notch cut into the rim (invented).
""",
    "objects/spoon-b.md": """\
---
id: spoon-b
title: Spoon with hooked handle and plain rim
place: brinmoor
access: public
---
A second hook-handled spoon; its rim notch could not be seen on the photograph,
so it is coded unknown (invented).
""",
    "objects/spoon-c.md": """\
---
id: spoon-c
title: Spoon with straight handle
place: brinmoor
access: public
---
A long-handled spoon without a hook (invented).
""",
    "objects/spoon-e.md": """\
---
id: spoon-e
title: Short-handled deep spoon
place: calder-end
access: public
---
A deep spoon with a short grip; the hook character does not apply (invented).
""",
    "objects/spoon-f.md": """\
---
id: spoon-f
title: Ladle from the Old Fold
place: old-fold
access: public
---
A very deep ladle used here as the outgroup. Its find-spot is generalised in the
gazetteer (invented).
""",
    "characters/bowl.md": """\
---
id: bowl
label: Bowl depth
group: Bowl
ordered: true
states:
  "0": shallow
  "1": deep
  "2": very deep
---
Depth of the bowl measured against its width; an ordered character.
""",
    "characters/handle.md": """\
---
id: handle
label: Long handle
group: Handle
states:
  "0": absent
  "1": present
---
""",
    "characters/hook.md": """\
---
id: hook
label: Hooked handle end
group: Handle
states:
  "0": absent
  "1": present
---
Coded "-" (not applicable) where the spoon has no long handle.
""",
    "characters/notch.md": """\
---
id: notch
label: Notched rim
group: Bowl
states:
  "0": absent
  "1": present
---
""",
    "clades/hooked.md": """\
---
title: Hook-handled spoons
members: [spoon-a, spoon-b]
---
The spoons with hooked handles (an invented grouping).
""",
    "pages/about.md": """\
---
title: About this atlas
---
This starter atlas is **invented**: the spoons, hamlets and coordinates do not exist.
Replace its files with your own study.

Exact find-spots of heritage sites invite looting, and some cultural material is restricted
by its community. Use the `precision` and `access` columns, and follow community protocols,
local heritage law and the advice of the people concerned; the tool's settings do not replace
them.
""",
}


def write_starter(directory: Path) -> list[Path]:
    """Write the starter files into ``directory`` (which must be new or empty)."""
    directory = Path(directory)
    if directory.exists() and (not directory.is_dir() or any(directory.iterdir())):
        raise AtlasError(Problem(str(directory), None, "already exists and is not empty; "
                                 "choose a new folder"))
    written = []
    for name, text in FILES.items():
        path = directory / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
        written.append(path)
    for folder in ("media",):
        (directory / folder).mkdir(exist_ok=True)
    return written
