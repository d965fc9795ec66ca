"""Count the hostile-input cases of tests/test_reliability_*.py by running them.

    python tests/hostile_census.py            # print the table (Markdown)
    python tests/hostile_census.py --write    # also refresh the table in docs/reliability.md

Each pytest item (one parametrized case) is counted under the input class of its test
function; the outcome column says what happened to all of them. Nothing is typed by hand:
a case added to a test shows up here on the next run.
"""
from __future__ import annotations

import re
import sys
import time
from collections import defaultdict
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
DOC = ROOT / "docs" / "reliability.md"
BEGIN, END = "<!-- census:begin -->", "<!-- census:end -->"

#: (module, test function) -> input class shown in the table
CLASSES = {
    ("structure", "test_hostile_smiles_refused"):
        "SMILES text refused: empty, garbage, 10^5-atom, radicals, bad aromaticity, dots, unicode, NUL "
        "(parent / sites / plan)",
    ("structure", "test_hostile_smiles_refused_by_screen"): "the same SMILES refused by screen",
    ("structure", "test_library_api_refuses_the_same"): "the same SMILES refused by the library API",
    ("structure", "test_odd_but_valid_smiles_accepted"):
        "odd but valid SMILES accepted: isotopes, explicit H, Kekulé, salts, titles, C60, stereo",
    ("structure", "test_huge_smiles_refused_fast"): "heavy-atom cap and --max-atoms",
    ("structure", "test_max_atoms_option_raises_the_cap"): "heavy-atom cap and --max-atoms",
    ("structure", "test_verbose_keeps_the_domain_error"): "--verbose shows the error",
    ("files", "test_hostile_structure_file_refused"):
        "structure FILE: missing, folder, binary, UTF-16, Latin-1, empty, huge line, 2 records "
        "(parent / sites / plan / screen)",
    ("files", "test_structure_file_encodings_accepted"): "structure FILE with BOM, CRLF, CR, tab accepted",
    ("files", "test_mol_file_accepted"): "structure FILE with BOM, CRLF, CR, tab accepted",
    ("files", "test_hostile_results_file_refused"):
        "select RESULTS.csv: empty, binary, Latin-1, zero rows, unknown column, 2 MB field, ragged, NUL, quotes",
    ("files", "test_results_file_bom_and_crlf_accepted"): "select RESULTS.csv with BOM / CRLF accepted, same result",
    ("files", "test_hostile_design_refused"):
        "select DESIGN_DIR: damaged design.json (not JSON, NaN, nesting, wrong types)",
    ("files", "test_design_folder_without_design"): "select DESIGN_DIR: missing / empty folder",
    ("files", "test_hostile_batch_input_refused"):
        "batch FILE unreadable: missing, empty, header only, binary, NUL, Latin-1",
    ("files", "test_bad_batch_row_is_a_row_error_not_a_crash"):
        "batch: one bad row (1 MB SMILES, 3 × 10^5 ring atoms, junk, line break) is a row error, neighbours planned",
    ("files", "test_batch_bom_crlf_same_as_plain"): "batch FILE with BOM / CRLF: same table",
    ("files", "test_batch_leaves_the_csv_field_limit_alone"):
        "batch leaves csv's process-wide field limit alone (restored after reading)",
    ("yaml", "test_hostile_yaml_refused"):
        "YAML at 8 options: python tags, alias bombs, recursive alias, 10^5 nesting, duplicate keys, encodings",
    ("yaml", "test_directory_or_missing_file_is_refused"): "YAML option given a folder or a missing file",
    ("yaml", "test_broken_library_entries_refused"): "library YAML: wrong types, unknown keys, duplicate ids",
    ("yaml", "test_duplicate_ids_across_entries_refused"): "library YAML: wrong types, unknown keys, duplicate ids",
    ("yaml", "test_weights_wrong_types"): "weights / thresholds YAML: wrong types, unknown keys",
    ("yaml", "test_thresholds_wrong_types"): "weights / thresholds YAML: wrong types, unknown keys",
    ("yaml", "test_bomb_refused_without_expanding"): "YAML loader: bombs refused, ordinary aliases kept",
    ("yaml", "test_ordinary_aliases_still_work"): "YAML loader: bombs refused, ordinary aliases kept",
    ("yaml", "test_brackets_inside_quotes_and_comments_are_not_nesting"):
        "YAML loader: bombs refused, ordinary aliases kept",
    ("options", "test_hostile_option_refused"):
        "option values: negative / zero / NaN / inf doses and amounts, pKa out of range, unknown ids, --top 0",
    ("injection", "test_compound_name_is_escaped_in_plan_report"): "injection: compound name (HTML + Markdown report)",
    ("injection", "test_compound_name_is_escaped_in_jupyter_fragment"): "injection: compound name (Jupyter fragment)",
    ("injection", "test_name_from_a_mol_file_title_is_escaped"): "injection: compound name (HTML + Markdown report)",
    ("injection", "test_library_entry_name_and_liability_are_escaped"):
        "injection: user library entry name and liability",
    ("injection", "test_chart_labels_with_markup_are_escaped"): "injection: user library entry name and liability",
    ("injection", "test_solvent_names_are_escaped"): "injection: user solvent-library names",
    ("injection", "test_results_notes_are_escaped_in_decision_record"):
        "injection: results notes and form labels (decision record)",
    ("injection", "test_form_labels_are_escaped_in_decision_record"):
        "injection: results notes and form labels (decision record)",
    ("injection", "test_batch_ids_and_names_are_escaped_in_summary"): "injection: batch ids and names (HTML summary)",
    ("injection", "test_every_safe_filter_in_templates_is_reviewed"):
        "template audit: every `safe` filter and `Markup` reviewed",
    ("injection", "test_markup_in_python_is_reviewed"): "template audit: every `safe` filter and `Markup` reviewed",
    ("output", "test_late_render_failure_leaves_nothing"):
        "late failure while rendering (plan, screen, select, batch, sites --svg): no file left",
    ("output", "test_failure_while_moving_files_into_place"): "failure between renames: no file left",
    ("output", "test_failure_keeps_earlier_outputs_intact"): "failing re-run keeps the earlier outputs byte for byte",
    ("output", "test_demo_failure_leaves_nothing"):
        "late failure while rendering (plan, screen, select, batch, sites --svg): no file left",
    ("output", "test_output_path_is_a_file"): "output path blocked by a file",
    ("output", "test_successful_runs_leave_no_temporaries"): "successful runs leave no temporaries",
    ("limits", "test_pathological_ring_systems_finish"):
        "pathological structures: C60, 30-ring ladders, cages, macrocycles, 21-site chains (sites / plan)",
    ("limits", "test_ladders_are_what_they_say"):
        "pathological structures: C60, 30-ring ladders, cages, macrocycles, 21-site chains (sites / plan)",
    ("limits", "test_many_site_molecule_beyond_the_default_cap_is_bounded"): "heavy-atom cap and --max-atoms",
    ("limits", "test_underflowing_solubility_estimate_is_a_clear_error"): "heavy-atom cap and --max-atoms",
    ("limits", "test_default_heavy_atom_cap"): "heavy-atom cap and --max-atoms",
    ("limits", "test_cap_counts_the_api_not_its_counterions"): "heavy-atom cap and --max-atoms",
    ("csv", "test_helper_quotes_hostile_text_and_reads_it_back"):
        "CSV formula injection: =, +, -, @, tab, CR cells quoted (OWASP), read back unchanged",
    ("csv", "test_helper_keeps_numbers"): "CSV formula injection: negative numbers stay numbers",
    ("csv", "test_helper_round_trips_quote_like_text"):
        "CSV formula injection: =, +, -, @, tab, CR cells quoted (OWASP), read back unchanged",
    ("csv", "test_every_csv_writer_goes_through_the_helper"):
        "CSV formula injection: every CSV writer uses the shared helper (source audit)",
    ("csv", "test_batch_csv_neutralized_library"):
        "CSV formula injection: batch table (library, CLI), screen CSVs, demo results",
    ("csv", "test_batch_csv_neutralized_cli"):
        "CSV formula injection: batch table (library, CLI), screen CSVs, demo results",
    ("csv", "test_batch_json_keeps_the_original_text"):
        "CSV formula injection: batch table (library, CLI), screen CSVs, demo results",
    ("csv", "test_screen_csvs_neutralized_library"):
        "CSV formula injection: batch table (library, CLI), screen CSVs, demo results",
    ("csv", "test_screen_and_demo_results_csvs_cli"):
        "CSV formula injection: batch table (library, CLI), screen CSVs, demo results",
    ("csv", "test_results_template_read_back_unquotes"):
        "CSV formula injection: =, +, -, @, tab, CR cells quoted (OWASP), read back unchanged",
    ("signals", "test_batch_jobs_2_stops_cleanly_on_signal"):
        "SIGTERM / SIGINT during batch --jobs 2 (real CLI): workers stopped, no temporary, exit 143 / 130",
    ("signals", "test_parent_killed_by_sigkill_takes_its_workers_along"):
        "SIGKILL of the batch parent: no orphaned workers",
    ("signals", "test_library_run_batch_unwinds_on_signal"):
        "SIGINT / SIGTERM through the library (run_batch, jobs 2): no temporary, no worker left",
    ("signals", "test_commands_stop_cleanly_on_signal"):
        "SIGTERM / SIGINT during screen, select, demo, batch: one line, nothing written",
    ("signals", "test_signal_while_outputs_are_renamed_waits_for_the_set"):
        "signal while outputs are renamed: the set completes, the line says so",
    ("checkpoint", "test_interrupted_run_resumes_to_the_same_bytes"):
        "batch --checkpoint: stopped run resumed (CSV, JSON, JSON Lines; other --jobs; all chunks "
        "kept): same bytes, only missing rows planned, folder removed",
    ("checkpoint", "test_resume_with_other_jobs_gives_the_same_bytes"):
        "batch --checkpoint: stopped run resumed (CSV, JSON, JSON Lines; other --jobs; all chunks "
        "kept): same bytes, only missing rows planned, folder removed",
    ("checkpoint", "test_a_complete_checkpoint_plans_nothing"):
        "batch --checkpoint: stopped run resumed (CSV, JSON, JSON Lines; other --jobs; all chunks "
        "kept): same bytes, only missing rows planned, folder removed",
    ("checkpoint", "test_a_run_that_fails_before_any_chunk_leaves_no_folder"):
        "batch --checkpoint: a run failing at the start leaves no folder",
    ("checkpoint", "test_a_checkpoint_of_another_run_is_refused"):
        "batch --checkpoint of another run (input, chunk size, top, library changed): one line, "
        "checkpoint untouched, no temporary",
    ("checkpoint", "test_a_damaged_chunk_is_reported_not_trusted"):
        "batch --checkpoint damaged (chunk edited, manifest not JSON / other format), folder of "
        "other files, a file: refused",
    ("checkpoint", "test_a_damaged_manifest_is_refused"):
        "batch --checkpoint damaged (chunk edited, manifest not JSON / other format), folder of "
        "other files, a file: refused",
    ("checkpoint", "test_a_folder_of_other_files_or_a_file_is_refused"):
        "batch --checkpoint damaged (chunk edited, manifest not JSON / other format), folder of "
        "other files, a file: refused",
    ("checkpoint", "test_cli_killed_mid_run_resumes_to_the_same_bytes"):
        "batch --checkpoint --jobs 2 killed by SIGKILL / SIGTERM (real CLI), rerun: same bytes, "
        "no orphan, no temporary left",
    ("checkpoint", "test_resumed_run_records_every_plan_once_in_the_ledger"):
        "batch --checkpoint --record: resumed run records each plan once (ledger as uninterrupted)",
    ("properties", "test_para_nitro_never_raises_acid_pka"):
        "chemical sanity: para-nitro on phenols / benzoic acids (pairs)",
    ("properties", "test_para_donor_never_lowers_aryl_base_pka"):
        "chemical sanity: para-Me / OMe on anilines / pyridines (pairs)",
    ("properties", "test_c_methyl_never_lowers_amine_pka"): "chemical sanity: C-methyl on aliphatic amines (pairs)",
}
PROPERTY = "property tests (hypothesis, derandomized; examples each as set in the file)"


class _Collector:
    def __init__(self):
        self.outcomes: dict[str, str] = {}

    def pytest_runtest_logreport(self, report):
        prev = self.outcomes.get(report.nodeid)
        if hasattr(report, "wasxfail"):
            outcome = "xfailed" if report.skipped else "xpassed"
        elif report.failed:
            outcome = "failed"
        elif report.skipped:
            outcome = "skipped"
        else:
            outcome = "passed"
        if prev in (None, "passed") or outcome == "failed":
            self.outcomes[report.nodeid] = outcome


def _class_of(nodeid: str) -> str:
    m = re.match(r".*test_reliability_(\w+)\.py::(\w+)", nodeid)
    if not m:
        return "other"
    module, func = m.groups()
    if module == "properties" and (module, func) not in CLASSES:
        return PROPERTY
    return CLASSES.get((module, func), f"other ({module}.{func})")


def census() -> tuple[str, int]:
    collector = _Collector()
    files = sorted(str(p) for p in HERE.glob("test_reliability_*.py"))
    code = pytest.main(["-q", "-p", "no:cacheprovider", "-m", "not slow", *files],
                       plugins=[collector])
    rows: dict[str, dict[str, int]] = defaultdict(lambda: defaultdict(int))
    for nodeid, outcome in collector.outcomes.items():
        rows[_class_of(nodeid)][outcome] += 1
    lines = ["| input class | cases | outcome |", "|---|---:|---|"]
    total = defaultdict(int)
    order = {name: i for i, name in enumerate(dict.fromkeys(CLASSES.values()))}
    for name in sorted(rows, key=lambda n: (order.get(n, len(order)), n)):
        counts = rows[name]
        n = sum(counts.values())
        for k, v in counts.items():
            total[k] += v
        bad = counts.get("failed", 0) + counts.get("xpassed", 0)
        if counts.get("xfailed") and counts["xfailed"] == n:
            text = "known bug, failing test marked xfail (strict)"
        elif not bad:
            text = "all handled: nothing crashed, nothing lost"
        else:
            text = f"{counts.get('failed', 0)} FAILED"
        if counts.get("xfailed") and counts["xfailed"] != n:
            text += f"; {counts['xfailed']} known bug(s) marked xfail"
        if counts.get("skipped"):
            text += f"; {counts['skipped']} skipped"
        lines.append(f"| {name} | {n} | {text} |")
    failed = sorted(k for k, v in collector.outcomes.items() if v in ("failed", "xpassed"))
    n_all = sum(total.values())
    lines.append(f"| **all** | **{n_all}** | {total.get('passed', 0)} passed, "
                 f"{total.get('failed', 0)} failed, {total.get('xfailed', 0)} xfailed, "
                 f"{total.get('skipped', 0)} skipped |")
    lines += [f"\nFAILED {k}" for k in failed]
    return "\n".join(lines), int(code)


def main(argv: list[str]) -> int:
    start = time.perf_counter()
    table, code = census()
    print()
    print(table)
    print(f"\n({time.perf_counter() - start:.0f} s)")
    if "--write" in argv:
        text = DOC.read_text(encoding="utf-8")
        head, _, rest = text.partition(BEGIN)
        _, _, tail = rest.partition(END)
        DOC.write_text(f"{head}{BEGIN}\n{table}\n{END}{tail}", encoding="utf-8")
        print(f"\nupdated {DOC.relative_to(ROOT)}")
    return code


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
