"""A plan's ``checks:`` list and mask references, read into ``Check`` objects.

Entries (see ``acquire.checks`` for what each judges)::

    checks:
      - mask: patch-2g45                       # bare name or path relative to the plan
      - bandwidth: {below_swr: 2.0, at_least: 60 MHz}     # or below_return_loss: 10 dB
      - resonance: {within: [2.43 GHz, 2.47 GHz]}
      - worst_swr: {band: [2.40 GHz, 2.50 GHz], at_most: 1.8}
      - distance: {...}                        # acquire.timedomain.checks
      - insertion_loss: {band: [10 MHz, 6 GHz], at_most: 2.5 dB}      # two-port limits:
      - return_loss: {band: [10 MHz, 6 GHz], at_least: 20 dB}         # acquire.twoport_checks
      - group_delay_flatness: {band: [2.4 GHz, 2.5 GHz], at_most: 0.5 ns, aperture: 5}

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
from acquire.twoport_checks import (
    REFLECTION,
    TRANSMISSION,
    GroupDelayFlatnessCheck,
    InsertionLossCheck,
    ReturnLossCheck,
)
from acquire.yamlfile import Node, load_yaml, show

CHECK_KINDS = ("mask", "bandwidth", "resonance", "worst_swr", "distance", "insertion_loss",
               "return_loss", "group_delay_flatness")


def parse_checks(node: Node) -> list[Check]:
    """Validate a plan's ``checks:`` list; errors name the plan file and key path."""
    checks: list[Check] = []
    for item in node.elements():
        item.mapping(CHECK_KINDS)
        if len(item.value) != 1:
            item.fail(f"must hold exactly one check ({', '.join(CHECK_KINDS)}), "
                      f"got {len(item.value)} keys")
        kind = next(iter(item.value))
        checks.append(_PARSERS[kind](item[kind]))
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


def _parse_insertion_loss(node: Node) -> Check:
    node.mapping(["band", "at_most", "parameter"], required=["band", "at_most"])
    lo, hi = _freq_pair(node["band"])
    at_most = node["at_most"].quantity("decibel")
    if at_most < 0:
        node["at_most"].fail("insertion loss is positive dB for a passive device, e.g. 3 dB")
    return InsertionLossCheck(lo, hi, at_most, node["parameter"].text("S21",
                                                                      choices=TRANSMISSION))


def _parse_return_loss(node: Node) -> Check:
    node.mapping(["band", "at_least", "parameters"], required=["band", "at_least"])
    lo, hi = _freq_pair(node["band"])
    at_least = node["at_least"].quantity("decibel")
    if at_least <= 0:
        node["at_least"].fail("return loss is positive dB, e.g. 15 dB")
    params: tuple[str, ...] = REFLECTION
    if node["parameters"].present:
        params = tuple(n.text(choices=REFLECTION) for n in node["parameters"].elements(
            min_len=1))
        if len(set(params)) != len(params):
            node["parameters"].fail(f"lists a parameter twice: {list(params)}")
    return ReturnLossCheck(lo, hi, at_least, params)


def _parse_group_delay_flatness(node: Node) -> Check:
    node.mapping(["band", "at_most", "parameter", "aperture"], required=["band", "at_most"])
    lo, hi = _freq_pair(node["band"])
    at_most = node["at_most"].quantity("time", lo=0.0)
    aperture = node["aperture"].integer(1, lo=1, hi=1001)
    if aperture % 2 == 0:
        node["aperture"].fail(f"must be an odd number of points, got {aperture}")
    return GroupDelayFlatnessCheck(lo, hi, at_most, node["parameter"].text(
        "S21", choices=TRANSMISSION), aperture)


_PARSERS = {
    "mask": _parse_mask,
    "bandwidth": _parse_bandwidth,
    "resonance": _parse_resonance,
    "worst_swr": _parse_worst_swr,
    "distance": parse_distance_check,
    "insertion_loss": _parse_insertion_loss,
    "return_loss": _parse_return_loss,
    "group_delay_flatness": _parse_group_delay_flatness,
}
