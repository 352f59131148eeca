"""The tool's version and the result document's schema id: the bottom of the
import order, so that any module can write them (the package face re-exports
both)."""

__version__ = "0.1.0"
SCHEMA = "characterize.result/1"
