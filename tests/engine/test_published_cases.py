"""Published cases from ../shared/REFERENCES.md."""

import pytest

from scheduling.engine import critical_path, parse_network

from .builders import ALL_DAYS, doc

SEVEN_DAYS = [{"key": "weekdays", "workdays": ALL_DAYS}]

# A public precedence-diagram training network (REFERENCES.md): durations in
# days, "(SS)" a start-to-start link, all others FS with zero lag. Its printed
# results were not retrieved; the critical path A–D–H–M–N of length 38 is
# checked by hand: A 0–2, D 2–14, H 14–30, M 30–35, N 35–38.
TRAINING = (
    "A 2 -;B 10 A(SS);C 13 A;D 12 A;E 12 B;F 7 B;G 10 D;H 16 D;I 6 F;"
    "J 12 C,G(SS);K 5 I(SS);L 8 E,I,K;M 5 H;N 3 G,J,L,M"
)


def training_network():
    acts, rels = [], []
    for part in TRAINING.split(";"):
        key, duration, preds = part.split()
        acts.append((key, int(duration)))
        for p in [] if preds == "-" else preds.split(","):
            rels.append((p[0], key, "SS" if p.endswith("(SS)") else "FS"))
    return parse_network(doc(acts, rels, calendars=SEVEN_DAYS))


def test_training_network_critical_path_is_a_d_h_m_n_of_38_days():
    net = training_network()
    result = critical_path(net)
    assert result.length == 38
    assert [s.key for s in result.critical_path] == ["A", "D", "H", "M", "N"]
    critical = {k for k, c in zip(net.keys, result.critical, strict=True) if c}
    assert critical == {"A", "D", "H", "M", "N"}


def test_training_network_floats_worked_by_hand():
    # Early/late starts from the relation algebra, by hand (day numbers from 0):
    # E: ES 10 (after B, which starts with A), LS 15 (L must start by 27);
    # L: ES 23 (after I 17–23), LS 27 (N starts at 35): TF 4; E's free float
    # is 1 (L waits for I until 23).
    net = training_network()
    result = critical_path(net)
    tf = dict(zip(net.keys, result.total_float.tolist(), strict=True))
    ff = dict(zip(net.keys, result.free_float.tolist(), strict=True))
    assert (tf["E"], ff["E"]) == (5, 1)
    assert (tf["L"], ff["L"]) == (4, 4)
    assert tf["J"] == 8 and ff["J"] == 8


@pytest.mark.parametrize(("d", "length"), [(2, 8), (3, 7), (4, 6), (5, 5)])
def test_reverse_critical_activity_shortens_the_project_when_lengthened(d, length):
    # Wiest, "Precedence diagramming method: some unusual characteristics and
    # their implications for project managers", J. Operations Management 1(3),
    # 1981: A(5) -FF 0-> B(d) -SS 0-> C(5); lengthening B shortens the project.
    net = parse_network(
        doc(
            [("A", 5), ("B", d), ("C", 5)],
            [("A", "B", "FF"), ("B", "C", "SS")],
            calendars=SEVEN_DAYS,
        )
    )
    result = critical_path(net)
    assert result.length == length
    assert [s.key for s in result.critical_path] == ["A", "B", "C"]
    assert [s.driver.type for s in result.critical_path[1:]] == ["FF", "SS"]
