"""Command-line arguments of the commands that work on files and projects rather than
estimates: table, run, codebook, convert, columns, look, demo."""

from __future__ import annotations

import argparse

from wstats.cli.args import OUTPUT_FORMATS, Parser, _add_data_options, _add_output_options

__all__ = ["add_codebook_args", "add_columns_args", "add_convert_args", "add_demo_args",
           "add_look_args", "add_run_args", "add_table_args"]

def add_table_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("spec", metavar="SPEC.toml", help="publication table spec")
    _add_output_options(p, (*OUTPUT_FORMATS, "xlsx", "docx"))


def add_run_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("analysis", metavar="ANALYSIS.toml", help="analysis file naming every output")
    p.add_argument("--overwrite", action="store_true", help="replace existing outputs")


def add_codebook_args(p: argparse.ArgumentParser) -> None:
    sub = p.add_subparsers(dest="action", metavar="ACTION", required=True,
                           parser_class=Parser)
    d = sub.add_parser("draft", help="write a starting codebook from a file's metadata",
                       description="Write a starting codebook; suspected special codes are "
                       "commented suggestions to confirm.\n\nexample:\n  wstats codebook draft "
                       "survey.xpt -o survey_codebook.toml",
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    d.add_argument("data", metavar="FILE")
    d.add_argument("-o", "--output", metavar="OUT", help="write the TOML here (default: screen)")
    d.add_argument("--overwrite", action="store_true", help="replace an existing output")
    c = sub.add_parser("check", help="count rows by reason and code; list what is unexplained",
                       description="Apply a codebook and report counts per reason and raw code,"
                       " unexplained values and codebook variables absent from the file.\n\n"
                       "example:\n  wstats codebook check survey.xpt survey_codebook.toml",
                       formatter_class=argparse.RawDescriptionHelpFormatter)
    c.add_argument("data", metavar="FILE")
    c.add_argument("codebook", metavar="CODEBOOK")
    c.add_argument("--rows", metavar="START:STOP", help="check only this row range")


def add_convert_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="FILE", help="survey file to convert")
    p.add_argument("output", metavar="OUT.parquet", help="Parquet file to write")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output")


def add_columns_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", metavar="FILE", help="survey file")
    p.add_argument("--search", nargs="+", metavar="WORD", default=[],
                   help="show only columns whose name or label holds every WORD "
                        "(case-insensitive)")
    p.add_argument("--names-only", action="store_true",
                   help="print the matching names, one a line, without reading the data")
    p.add_argument("--encoding", default="utf-8", metavar="NAME",
                   help="text encoding of a CSV file or of labels (e.g. latin-1)")
    _add_output_options(p, ("table", "json", "csv"))


def add_look_args(p: argparse.ArgumentParser) -> None:
    _add_data_options(p)
    p.add_argument("variables", metavar="VAR", nargs="+", help="columns to look at")
    p.add_argument("--weight", metavar="COL",
                   help="weights for the weighted mean, quartiles and chart (default: the "
                        "codebook's [design] weight, else none)")
    _add_output_options(p, ("table", "json"))


def add_demo_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("folder", metavar="DIR", nargs="?", default="wstats-demo",
                   help="folder for the demo files (default ./wstats-demo)")
    p.add_argument("--overwrite", action="store_true",
                   help="write into a folder that already has files")
    p.add_argument("--rows", type=int, default=None, help="respondents (default about 60,000)")
    p.add_argument("--columns", type=int, default=None, help="pad to this many columns")
    p.add_argument("--periods", type=int, default=0, metavar="N",
                   help="also write N independent periods (period1.xpt, ...) to pool")
