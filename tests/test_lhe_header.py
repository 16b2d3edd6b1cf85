"""lhe_info: the <init> block and weight declarations (LHEF 1.0 / 2.0 / 3.0)."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import pytest

import evtkin
from evtkin.io.lhe_header import LHEInfo, Process
from lhe_textgen import minimal_file

FIXTURE = Path(__file__).parent / "data" / "lhe" / "aurora_toy.lhe"


def write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "h.lhe"
    p.write_text(text)
    return p


def test_init_fields_follow_heprup_order():
    info = evtkin.lhe_info(FIXTURE)
    # LHEF 1.0 (hep-ph/0609017, the <init> block; HEPRUP of hep-ph/0109068): first line
    # IDBMUP(1) IDBMUP(2) EBMUP(1) EBMUP(2) PDFGUP(1) PDFGUP(2) PDFSUP(1) PDFSUP(2) IDWTUP NPRUP,
    # then NPRUP lines XSECUP XERRUP XMAXUP LPRUP
    assert isinstance(info, LHEInfo)
    assert info.version == "3.0"
    assert info.beams == (2212, 2212)
    assert info.beam_energies == (6800.0, 6800.0)
    assert info.pdf_group == (0, 0)
    assert info.pdf_set == (303600, 303600)
    assert info.weighting == -4
    assert info.processes == (
        Process(process_id=1, xsec_pb=812.5, xsec_err_pb=2.5, max_weight=812.5),
        Process(process_id=2, xsec_pb=61.25, xsec_err_pb=0.4, max_weight=61.25),
    )
    assert info.total_xsec_pb == 873.75
    assert info.total_xsec_err_pb == pytest.approx(math.hypot(2.5, 0.4))
    # head-on beams of negligible mass: sqrt(s) = 2 sqrt(E1 E2) (PDG kinematics review)
    assert info.sqrt_s == pytest.approx(13600.0)
    assert info.xsecinfo == {"neve": "24", "totxsec": "873.75"}
    assert info.generators == (("evtkin-toy", "0.1"),)
    with pytest.raises(dataclasses.FrozenInstanceError):
        info.weighting = 3  # type: ignore[misc]


def test_weight_groups_name_and_type_attributes():
    info = evtkin.lhe_info(FIXTURE)
    # LHEF 3.0 (arXiv:1405.1067): <weightgroup name=...>; early drafts used type=
    assert info.weight_names == ("mur2", "mur05", "pdf1")
    assert info.weight_groups == {"scale_variation": ("mur2", "mur05"), "pdf_members": ("pdf1",)}
    assert info.weight_group_combine == {"scale_variation": "envelope", "pdf_members": "hessian"}
    assert info.weight_descriptions["mur05"] == "muR=0.5 muF=1.0"


def test_initrwgt_inside_init_and_ungrouped_weights(tmp_path):
    init = (
        "<init>\n 11 -11 45.6 45.6 0 0 0 0 3 1\n 1.0 0.0 1.0 1\n"
        "<initrwgt>\n<weight id='x1'>a</weight>\n<weightgroup name='g'>\n"
        "<weight id='x2'>b</weight>\n</weightgroup>\n</initrwgt>\n</init>\n"
    )
    info = evtkin.lhe_info(write(tmp_path, minimal_file("", init=init)))
    assert info.weight_names == ("x1", "x2")
    assert info.weight_groups == {"g": ("x2",)}
    assert info.beams == (11, -11)
    assert info.sqrt_s == pytest.approx(91.2)


def test_v2_weightinfo_names(tmp_path):
    init = (
        "<init>\n 2212 2212 4000 4000 -1 -1 -1 -1 -4 1\n 1.0 0.0 1.0 1\n"
        "<generator version='2.0'>sampler-x</generator>\n"
        "<weightinfo name='w_a' mur='1' muf='1'/>\n<weightinfo name=\"w_b\" mur='2'/>\n</init>\n"
    )
    info = evtkin.lhe_info(write(tmp_path, minimal_file("", init=init, version="2.0")))
    assert info.version == "2.0"
    assert info.weight_names == ("w_a", "w_b")
    assert info.generators == (("sampler-x", "2.0"),)
    assert info.pdf_group == (-1, -1)


def test_declarations_in_comments_and_cdata_are_ignored(tmp_path):
    head = (
        "<!-- <init> not this one </init> <initrwgt><weight id='no1'/></initrwgt> -->\n"
        "<header>\n<![CDATA[ <init>\n 1 1 1 1 1 1 1 1 1 1\n</init> ]]>\n"
        "<initrwgt><weight id='yes'>kept</weight>"
        "<!-- <weight id='no2'>x</weight> --></initrwgt>\n</header>\n"
    )
    info = evtkin.lhe_info(write(tmp_path, minimal_file("", head=head)))
    assert info.weight_names == ("yes",)
    assert info.beams == (2212, 2212)
    assert info.processes[0].process_id == 7


def test_init_comments_and_hash_lines(tmp_path):
    init = (
        "<init>\n<!-- comment before the numbers -->\n 2212 -2212 980 980 0 0 0 0 2 1\n"
        " 3.3D+00 1.0D-01 4.4D+00 42\n# a comment line\n</init>\n"
    )
    info = evtkin.lhe_info(write(tmp_path, minimal_file("", init=init, version="1.0")))
    assert info.beams == (2212, -2212)
    assert info.processes == (Process(42, 3.3, 0.1, 4.4),)


def test_to_dict_is_json_ready():
    import json

    d = evtkin.lhe_info(FIXTURE).to_dict()
    back = json.loads(json.dumps(d))
    assert back["weight_groups"]["pdf_members"] == ["pdf1"]
    assert back["processes"][1]["xsec_pb"] == 61.25


def test_duplicate_weight_ids_are_an_error(tmp_path):
    head = "<header><initrwgt><weight id='a'/><weight id='a'/></initrwgt></header>\n"
    with pytest.raises(evtkin.LHEError, match="declared more than once: a"):
        evtkin.lhe_info(write(tmp_path, minimal_file("", head=head)))


def test_xml_entities_in_weight_declarations_are_unescaped(tmp_path):
    # XML 1.0 (W3C, sec. 4.6): &lt; &gt; &amp; &quot; &apos; and character references
    # stand for < > & " ' and the referenced character
    head = (
        "<header>\n<initrwgt>\n"
        "<weightgroup name='mu &amp; pdf' combine='envelope'>\n"
        "<weight id='a&amp;b'> dyn_scale &lt; 3 &amp;&amp; muR=&quot;2&quot; "
        "&#955;&#x3bb; </weight>\n"
        "<weight id='c'> it&apos;s &gt; 1 </weight>\n"
        "</weightgroup>\n</initrwgt>\n</header>\n"
    )
    body = (
        "<event>\n 1 1 1.0 91.0 0.0078125 0.118\n"
        " 11 1 0 0 0 0 1.0 2.0 3.0 3.7416573867739413 0.0 0.0 9.0\n"
        "<rwgt>\n<wgt id='a&amp;b'> 0.5 </wgt>\n<wgt id='c'> 2.0 </wgt>\n</rwgt>\n</event>\n"
    )
    path = write(tmp_path, minimal_file(body, head=head))
    info = evtkin.lhe_info(path)
    assert info.weight_names == ("a&b", "c")
    assert info.weight_groups == {"mu & pdf": ("a&b", "c")}
    assert info.weight_descriptions["a&b"] == 'dyn_scale < 3 && muR="2" λλ'
    assert info.weight_descriptions["c"] == "it's > 1"
    # the events' <wgt id='a&amp;b'> still maps to the unescaped id's column
    chunk = next(iter(evtkin.read_lhe(path)))
    assert chunk.weights.to_list() == [[0.5, 2.0]]
