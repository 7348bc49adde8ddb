"""The link stage: every cross-reference checked, all problems in one run, profiles applied."""

from __future__ import annotations

import numpy as np
import pytest

from atlas.build import load
from atlas.errors import AtlasError
from atlas.link import generalise

from .conftest import write_atlas


def test_starter_links_cleanly(starter):
    atlas = load(starter)
    assert len(atlas.objects) == 6
    assert [c.id for c in atlas.characters] == ["bowl", "handle", "hook", "notch"]
    bowl = atlas.characters[0]
    assert bowl.symbols == ("0", "1", "2") and bowl.ordered
    # masks: bit k = state k; spoon-f is coded 2 for bowl and 0/1 for notch (starter matrix)
    f = atlas.taxa.index("spoon-f")
    assert atlas.masks[f, 0] == 0b100 and atlas.masks[f, 3] == 0b11
    # '?' and '-' are "any state" (missing data)
    b = atlas.taxa.index("spoon-b")
    assert atlas.masks[b, 3] == 0b11
    assert list(atlas.n_states) == [3, 2, 2, 2]
    assert atlas.ordered.tolist() == [True, False, False, False]


def test_generalise_moves_to_the_cell_centre():
    # 1-degree grid centres, computed by hand
    assert generalise(-32.10) == -32.5 and generalise(-14.70) == -14.5 and generalise(0.2) == 0.5


def test_generalised_coordinates_never_pass_the_link_stage(starter):
    atlas = load(starter)
    fold = atlas.places["old-fold"]
    assert (fold.lat, fold.lon) == (-32.5, -14.5)


def test_all_cross_reference_problems_at_once(starter_files, tmp_path):
    files = dict(starter_files)
    files["matrix.csv"] = files["matrix.csv"].replace("spoon-c,", "spoon-cc,").replace(
        "spoon-e,1,0,-,1", "spoon-e,1,0,7,1")
    files["objects/spoon-a.md"] = files["objects/spoon-a.md"].replace("place: brinmoor",
                                                                      "place: brinmor")
    files["objects/spoon-x.md"] = "---\nid: spoon-x\n---\n"
    files["clades/hooked.md"] = files["clades/hooked.md"].replace("spoon-b]", "spoon-bb]")
    files["characters/notch.md"] = files["characters/notch.md"].replace("id: notch", "id: notches")
    root = write_atlas(tmp_path / "bad", files)
    with pytest.raises(AtlasError) as info:
        load(root)
    text = "\n".join(p.format() for p in info.value.problems)
    assert "matrix.csv:4: object 'spoon-cc' has a row in the matrix but is not a tip" in text
    assert "spoon-cc' has a row in the matrix but is not a tip of the trees (did you mean " \
           "spoon-c" in text
    assert "matrix.csv:6: object 'spoon-e': state '7' of character 'hook' is not one of its " \
           "states (0, 1)" in text
    assert "objects/spoon-a.md:4: place 'brinmor' is not in the gazetteer " \
           "(did you mean brinmoor?)" in text
    assert "objects/spoon-x.md:2: object 'spoon-x' is not a tip of the trees" in text
    assert "member 'spoon-bb' is not a tip" in text
    assert "characters/notch.md:2: character 'notches' is not a column of the matrix" in text
    assert len(info.value.problems) == 6, text


def test_tip_without_row_or_place_is_a_warning_and_kept(starter_files, tmp_path):
    files = dict(starter_files)
    files["matrix.csv"] = "\n".join(line for line in files["matrix.csv"].splitlines()
                                    if not line.startswith("spoon-b")) + "\n"
    files["objects/spoon-c.md"] = files["objects/spoon-c.md"].replace("place: brinmoor\n", "")
    atlas = load(write_atlas(tmp_path / "a", files))
    b = atlas.objects["spoon-b"]
    assert not b.has_row and atlas.cells[b.taxon] == ()
    assert np.all(atlas.masks[b.taxon] == [0b111, 0b11, 0b11, 0b11])
    warnings = [w.format() for w in atlas.warnings]
    assert any("1 object of the trees has no row in the matrix (traits unknown): spoon-b" in w
               for w in warnings)
    assert any("1 object has no place (listed under the map): spoon-c" in w for w in warnings)


def test_profiles_withhold_objects_and_places(starter_files, tmp_path):
    files = dict(starter_files)
    files["objects/spoon-a.md"] = files["objects/spoon-a.md"].replace("access: public",
                                                                      "access: community")
    files["places.csv"] = files["places.csv"].replace("-15.05,exact,public",
                                                      "-15.05,exact,restricted")
    root = write_atlas(tmp_path / "p", files)
    public = load(root, "public")
    a = public.objects["spoon-a"]
    assert a.withheld and a.title == "Withheld" and a.body == "" and a.place is None
    assert "calder-end" not in public.places
    assert public.objects["spoon-d"].place is None and public.objects["spoon-d"].place_withheld
    community = load(root, "community")
    assert not community.objects["spoon-a"].withheld
    assert community.objects["spoon-a"].title == "Spoon with hooked handle"
