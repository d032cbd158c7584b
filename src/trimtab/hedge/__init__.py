"""Hedge overlays: a few instruments (index futures, baskets, return series) sized in factor form."""

from trimtab.hedge._instruments import Instruments, prepare_instruments
from trimtab.hedge._overlay import overlay
from trimtab.hedge._result import OverlayResult

__all__ = ["Instruments", "OverlayResult", "overlay", "prepare_instruments"]
