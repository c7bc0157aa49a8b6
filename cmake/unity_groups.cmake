# Written by scripts/unity-groups: do not edit. Groups of the library's sources that
# PARITAS_UNITY_BUILD compiles as one file each (sources of one stage whose file-scope
# names do not clash); a source in no group compiles on its own.
set_source_files_properties(
  src/base/csv.cc
  src/base/read_limits.cc
  src/base/code_table.cc
  src/base/dense_kernels.cc
  src/base/sha256.cc
  PROPERTIES UNITY_GROUP base_1)
set_source_files_properties(
  src/survey/classification.cc
  src/survey/config.cc
  src/survey/yaml_load.cc
  src/survey/survey_loader.cc
  src/survey/small_tables.cc
  src/survey/price_reader.cc
  src/survey/survey_build.cc
  src/survey/duplicate_quotes.cc
  PROPERTIES UNITY_GROUP survey_1)
set_source_files_properties(
  src/aggregation/index_formulas.cc
  src/aggregation/geks.cc
  src/aggregation/aggregation.cc
  src/aggregation/normalisation.cc
  src/aggregation/methods/additive.cc
  src/aggregation/methods/geary_khamis.cc
  src/aggregation/methods/ikle_dikhanov_balk.cc
  src/aggregation/methods/spanning_tree.cc
  PROPERTIES UNITY_GROUP aggregation_1)
set_source_files_properties(
  src/aggregation/bilateral_matrix.cc
  src/aggregation/methods/geks_fisher.cc
  src/aggregation/methods/geks_tornqvist.cc
  src/aggregation/methods/weighted_cpd.cc
  src/aggregation/methods/registry.cc
  PROPERTIES UNITY_GROUP aggregation_2)
set_source_files_properties(
  src/elementary/cpd.cc
  src/elementary/robust_cpd.cc
  src/elementary/elementary.cc
  src/elementary/methods/cpd_heading.cc
  src/elementary/methods/cpd.cc
  src/elementary/methods/cprd.cc
  src/elementary/methods/jevons_geks.cc
  src/elementary/methods/robust_cpd.cc
  PROPERTIES UNITY_GROUP elementary_1)
set_source_files_properties(
  src/compute/compute.cc
  src/compute/imputation.cc
  src/compute/plausibility.cc
  PROPERTIES UNITY_GROUP compute_1)
set_source_files_properties(
  src/output/output_writers.cc
  src/output/run_record.cc
  src/output/run_folder.cc
  src/output/report.cc
  src/output/report_format.cc
  src/output/report_overview.cc
  src/output/report_price_levels.cc
  src/output/report_grids.cc
  PROPERTIES UNITY_GROUP output_1)
set_source_files_properties(
  src/uncertainty/outliers.cc
  src/uncertainty/replicate_chain.cc
  src/uncertainty/sensitivity.cc
  src/uncertainty/bootstrap.cc
  src/uncertainty/expanded_interval.cc
  src/uncertainty/pair_ratios.cc
  src/uncertainty/leave_one_out.cc
  src/uncertainty/coverage_curve.cc
  PROPERTIES UNITY_GROUP uncertainty_1)
set_source_files_properties(
  src/uncertainty/outlier_fit.cc
  src/uncertainty/items_needed.cc
  src/uncertainty/method_spread.cc
  src/uncertainty/sensitivity_job.cc
  PROPERTIES UNITY_GROUP uncertainty_2)
set_source_files_properties(
  src/jobs/jobs.cc
  src/jobs/guards.cc
  src/jobs/compare_job.cc
  src/jobs/carry_job.cc
  PROPERTIES UNITY_GROUP jobs_1)
set_source_files_properties(
  src/use/deflation.cc
  src/use/pair_comparison.cc
  src/use/pair_interval.cc
  src/use/publication_workbook.cc
  src/use/heading_contributions.cc
  src/use/carry_forward.cc
  PROPERTIES UNITY_GROUP use_1)
set_source_files_properties(
  src/use/publication.cc
  src/use/run_comparison.cc
  PROPERTIES UNITY_GROUP use_2)
set_source_files_properties(
  src/output/report_diagnostics.cc
  src/output/report_pairs.cc
  src/output/report_methods.cc
  src/output/report_style.cc
  src/output/comparison_report.cc
  src/output/report_tree.cc
  PROPERTIES UNITY_GROUP output_2)
