"""Project keys of the face support check: layer strengths, [[rivers]], [face], [[drives.face_support]]."""
import pytest

from settle.assessment import Assessment
from settle.inputs.project_file import load_project

from .test_project import edit, fails, site  # noqa: F401  (site is a fixture)

STRENGTHS = {
    'behaviour = "granular"\n': 'behaviour = "granular"\nfriction_angle_deg = 30\ncohesion_kpa = 0\n',
    'behaviour = "cohesive"\n': 'behaviour = "cohesive"\nfriction_angle_deg = 24\ncohesion_kpa = 5\n'
                                'undrained_strength_kpa = 50\nshear_modulus_mpa = 10\n',
}


def with_strengths(folder):
    for old, new in STRENGTHS.items():
        path = edit(folder, old, new)
    return path


def test_no_strengths_no_face_check(site):
    project = load_project(site / "project.toml")
    assert project.strengths == () and project.rivers == () and project.face is None
    assert Assessment(project).greenfield().face().result.face == []


def test_strengths_rivers_and_face_options_are_read(site):
    with_strengths(site)
    path = edit(site, "[output]", '[[rivers]]\nname = "Mill Leat"\ndrive = "West"\nfrom_chainage_m = 20\n'
                                  'to_chainage_m = 30\nbed_level_m = 19.0\nwater_level_m = 19.8\n\n'
                                  "[face]\nface_station_spacing_m = 2.5\nblowout_side_shear = true\n\n[output]")
    path = edit(site, "[[drives.reaches]]", '[[drives.face_support]]\nfrom_chainage_m = 10\n'
                                            'to_chainage_m = 40\nmode = "air_cushion"\n\n[[drives.reaches]]')
    p = load_project(path)
    assert [s.friction_angle_deg for s in p.strengths] == [30.0, 24.0]
    assert p.strengths[1].undrained_strength_kpa == 50.0 and p.strengths[0].undrained_strength_kpa is None
    assert p.rivers[0].name == "Mill Leat" and p.rivers[0].bed_level_m == 19.0
    assert p.face.face_station_spacing_m == 2.5 and p.face.blowout_side_shear is True
    assert p.face.blowout_factor == 1.1  # the documented default
    east = [d for d in p.drives if d.name == "East"][0]
    assert east.face_support[0].mode == "air_cushion"


def test_a_layer_without_strength_when_another_has_it(site):
    path = edit(site, 'behaviour = "granular"\n', 'behaviour = "granular"\nfriction_angle_deg = 30\ncohesion_kpa = 0\n')
    fails(path, r'\[\[ground.layers\]\] #2 "Clay": friction_angle_deg and cohesion_kpa are missing')


def test_cohesive_layer_needs_undrained_strength(site):
    path = edit(site, 'behaviour = "granular"\n', 'behaviour = "granular"\nfriction_angle_deg = 30\ncohesion_kpa = 0\n')
    path = edit(site, 'behaviour = "cohesive"\n', 'behaviour = "cohesive"\nfriction_angle_deg = 24\ncohesion_kpa = 5\n')
    fails(path, r'#2 "Clay": undrained_strength_kpa is required for a cohesive layer')


def test_friction_angle_out_of_range(site):
    with_strengths(site)
    path = edit(site, "friction_angle_deg = 30", "friction_angle_deg = 65")
    fails(path, r'#1 "Made ground": friction_angle_deg must be from 0 to 50 .*got 65')


def test_rivers_without_strengths(site):
    path = edit(site, "[output]", '[[rivers]]\ndrive = "West"\nfrom_chainage_m = 20\nto_chainage_m = 30\n'
                                  "bed_level_m = 19.0\nwater_level_m = 19.8\n\n[output]")
    fails(path, r"\[\[rivers\]\] and \[face\] are for the face support check")


def test_river_naming_no_drive_and_water_below_bed(site):
    with_strengths(site)
    river = ('[[rivers]]\ndrive = "North"\nfrom_chainage_m = 20\nto_chainage_m = 30\nbed_level_m = 19.0\n'
             "water_level_m = 19.8\n\n[output]")
    path = edit(site, "[output]", river)
    fails(path, r'\[\[rivers\]\] #1: drive "North" is not a drive of the project')
    path = edit(site, 'drive = "North"', 'drive = "West"')
    path = edit(site, "water_level_m = 19.8", "water_level_m = 18.0")
    fails(path, r"\[\[rivers\]\] #1: water_level_m must not be below the bed")


def test_river_outside_its_drive_is_refused_when_run(site):
    with_strengths(site)
    path = edit(site, "[output]", '[[rivers]]\ndrive = "West"\nfrom_chainage_m = 20\nto_chainage_m = 900\n'
                                  "bed_level_m = 19.0\nwater_level_m = 19.8\n\n[output]")
    with pytest.raises(Exception, match=r"\[\[rivers\]\] #1: chainage 20-900 m is outside the drive"):
        Assessment(load_project(path)).face()


def test_unknown_face_key_and_bad_mode(site):
    with_strengths(site)
    path = edit(site, "[output]", "[face]\nslurry_weight = 11\n\n[output]")
    fails(path, r'\[face\]: unknown key "slurry_weight"; did you mean "slurry_unit_weight_kn_m3"')
    path = edit(site, "slurry_weight = 11", 'support_mode = "foam"')
    fails(path, r'\[face\]: support_mode must be one of "slurry", "air_cushion"; got "foam"')


def test_k0_and_allowable_stability_ratio_are_read(site):
    with_strengths(site)
    path = edit(site, "undrained_strength_kpa = 50\n", "undrained_strength_kpa = 50\nk0 = 1.2\n")
    path = edit(site, "[output]", "[face]\nallowable_stability_ratio = 2.5\n\n[output]")
    p = load_project(path)
    assert p.strengths[1].k0 == 1.2 and p.strengths[0].k0 is None  # None: Jaky's 1 - sin phi' at run time
    assert p.face.allowable_stability_ratio == 2.5 and p.face.critical_stability_ratio == 6.0


@pytest.mark.parametrize("value, message", [
    ("0.1", r'#2 "Clay": k0 must be from 0.2 to 3; got 0.1'),
    ('"high"', r'#2 "Clay": k0 must be a positive number; got "high"'),
])
def test_bad_k0_in_the_project_file(site, value, message):
    with_strengths(site)
    fails(edit(site, "undrained_strength_kpa = 50\n", f"undrained_strength_kpa = 50\nk0 = {value}\n"), message)


def test_allowable_stability_ratio_above_the_critical_one(site):
    with_strengths(site)
    path = edit(site, "[output]", "[face]\nallowable_stability_ratio = 6.5\n\n[output]")
    fails(path, r"\[face\]: allowable_stability_ratio must be a number more than 0 and at most "
                r"critical_stability_ratio \(6\); got 6.5")
