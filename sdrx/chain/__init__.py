"""Chain specs (TOML -> validated dataclasses) and chain designs (analog prototypes, LO plan)."""

from .design import ChainDesign, IfStageDesign, MixerDesign, PreselectorDesign, design_chain
from .spec import ChainSpec, list_presets, load_chain, parse_spec, spec_to_dict

__all__ = [
    "ChainSpec",
    "ChainDesign",
    "IfStageDesign",
    "MixerDesign",
    "PreselectorDesign",
    "design_chain",
    "list_presets",
    "load_chain",
    "parse_spec",
    "spec_to_dict",
]
