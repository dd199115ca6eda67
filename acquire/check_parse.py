"""A plan's ``checks:`` list and mask references, read into ``Check`` objects.

Entries (see ``acquire.checks`` for what each judges)::

    checks:
      - mask: patch-2g45                       # bare name or path relative to the plan
      - bandwidth: {below_swr: 2.0, at_least: 60 MHz}     # or below_return_loss: 10 dB
      - resonance: {within: [2.43 GHz, 2.47 GHz]}
      - worst_swr: {band: [2.40 GHz, 2.50 GHz], at_most: 1.8}
      - distance: {...}                        # acquire.timedomain.checks

Errors name the plan file and key path. A mask file with ``domain: distance`` becomes a
distance check, so a verdict treats it like any other.
"""

from __future__ import annotations

from pathlib import Path

from acquire.check_nodes import freq_pair as _freq_pair
from acquire.checks import BandwidthCheck, Check, MaskCheck, ResonanceCheck, WorstSwrCheck
from acquire.errors import ConfigError, MaskError
from acquire.library import find_config
from acquire.masks import load_mask
from acquire.timedomain.checks import is_distance_mask, load_distance_mask, parse_distance_check
from acquire.twoport_checks import PARSERS as TWO_PORT_PARSERS
from acquire.yamlfile import Node, load_yaml, show

CHECK_KINDS = ("mask", "bandwidth", "resonance", "worst_swr", "distance", "insertion_loss",
               "return_loss", "group_delay_flatness")  # the last three: acquire.twoport_checks


def parse_checks(node: Node) -> list[Check]:
    """Validate a plan's ``checks:`` list; errors name the plan file and key path."""
    checks: list[Check] = []
    for item in node.elements():
        item.mapping(CHECK_KINDS)
        if len(item.value) != 1:
            item.fail(f"must hold exactly one check ({', '.join(CHECK_KINDS)}), "
                      f"got {len(item.value)} keys")
        kind = next(iter(item.value))
        parse = _PARSERS.get(kind) or TWO_PORT_PARSERS[kind]
        checks.append(parse(item[kind]))
    return checks


def mask_check(ref: str, base_dir: Path | None = None) -> MaskCheck:
    """A mask check from a bare name (shipped library) or a path."""
    return MaskCheck(load_mask(find_config("masks", ref, base_dir)))


def any_mask_check(ref: str, base_dir: Path | None = None) -> Check:
    """Like ``mask_check``, but a mask file with ``domain: distance`` gives a distance check."""
    return _mask_file_check(find_config("masks", ref, base_dir))


def _mask_file_check(path: Path) -> Check:
    if is_distance_mask(load_yaml(path, "mask", MaskError)):
        return load_distance_mask(path)
    return MaskCheck(load_mask(path))


def _parse_mask(node: Node) -> Check:
    ref = node.text()
    try:
        path = find_config("masks", ref, node.base_dir)
    except ConfigError as exc:
        node.fail(str(exc))
    return _mask_file_check(path)


def _parse_bandwidth(node: Node) -> Check:
    node.mapping(["below_swr", "below_return_loss", "at_least", "parameter"],
                 required=["at_least"])
    has_swr, has_rl = node["below_swr"].present, node["below_return_loss"].present
    if has_swr == has_rl:
        node.fail("needs exactly one of below_swr or below_return_loss")
    swr_max = node["below_swr"].number(lo=1.0) if has_swr else None
    if swr_max is not None and swr_max == 1.0:
        node["below_swr"].fail("must be above 1 (SWR 1 is a perfect match, no bandwidth)")
    rl = node["below_return_loss"].quantity("decibel") if has_rl else None
    if rl is not None and rl <= 0:
        node["below_return_loss"].fail("must be a positive return loss in dB, e.g. 10 dB")
    at_least = node["at_least"].quantity("frequency", lo=0.0)
    return BandwidthCheck(at_least, swr_max, rl, _reflection(node["parameter"]))


def _parse_resonance(node: Node) -> Check:
    node.mapping(["within", "method", "parameter"], required=["within"])
    lo, hi = _freq_pair(node["within"])
    method = node["method"].text("min_gamma", choices=("min_gamma", "reactance_zero"))
    return ResonanceCheck(lo, hi, method, _reflection(node["parameter"]))


def _parse_worst_swr(node: Node) -> Check:
    node.mapping(["band", "at_most", "parameter"], required=["band", "at_most"])
    lo, hi = _freq_pair(node["band"])
    return WorstSwrCheck(lo, hi, node["at_most"].number(lo=1.0), _reflection(node["parameter"]))


def _reflection(node: Node) -> str:
    text = node.text("S11").strip().upper()
    if len(text) != 3 or text[0] != "S" or not text[1:].isdigit() or text[1] != text[2] \
            or text[1] == "0":
        node.fail(f"must be a reflection parameter such as S11 or S22, got {show(node.value)}")
    return text


_PARSERS = {
    "mask": _parse_mask,
    "bandwidth": _parse_bandwidth,
    "resonance": _parse_resonance,
    "worst_swr": _parse_worst_swr,
    "distance": parse_distance_check,
}
