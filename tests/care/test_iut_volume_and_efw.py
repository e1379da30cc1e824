"""Estimated fetal weight (Hadlock FP, Harrist RB, Sharman RS, et al., Am J Obstet Gynecol
1985;151:333-337, HC/AC/FL model) and intrauterine transfusion volume (Mandelbrot L, et al.,
Am J Obstet Gynecol 1988;158:1-6, as compared by Giannina G, et al., Fetal Diagn Ther
1998;13:94-97): V = EFW x 0.14 mL/g x (target Hct - fetal Hct) / donor Hct."""
import pytest

from clinic.care import CareInputError, hadlock_efw, iut_volume


@pytest.mark.parametrize("hc, ac, fl", [(28.0, 25.0, 5.5), (30.0, 28.0, 6.0), (20.0, 17.0, 3.5)])
def test_hadlock_1985_formula(hc, ac, fl):
    # log10 EFW = 1.326 - 0.00326 AC FL + 0.0107 HC + 0.0438 AC + 0.158 FL (Hadlock 1985)
    expected = 10 ** (1.326 - 0.00326 * ac * fl + 0.0107 * hc + 0.0438 * ac + 0.158 * fl)
    assert hadlock_efw(hc, ac, fl) == pytest.approx(expected, rel=1e-12)


def test_hadlock_plausible_at_30_weeks():
    # HC 28, AC 25, FL 5.5 cm (about 30 weeks): about 1385 g, derived from the Hadlock 1985 formula
    assert hadlock_efw(28.0, 25.0, 5.5) == pytest.approx(1384.7, abs=0.5)


def test_cli_example_iut_volume():
    # 1200 g x 0.14 mL/g = 168 mL fetoplacental volume; x (45 - 20) / 80 = 52.5 mL (Mandelbrot 1988)
    r = iut_volume(1200, 20, 45, 80)
    assert r["fetoplacental_volume_ml"] == pytest.approx(168.0)
    assert r["volume_ml"] == pytest.approx(52.5)


@pytest.mark.parametrize("args, field", [
    ((1200, 45, 40, 80), "target_hct"),   # target below the fetal Hct
    ((1200, 20, 45, 40), "donor_hct"),    # donor Hct outside 50-90 %
    ((100, 20, 45, 80), "efw_g"),         # EFW outside 200-5000 g
])
def test_bad_input_names_the_field(args, field):
    with pytest.raises(CareInputError) as e:
        iut_volume(*args)
    assert field in e.value.errors
