"""Populations as auditors hold them: files of records.

``reading`` loads a CSV, XLSX or Parquet file into an embedded database; ``amounts``
reads amounts exactly in the styles exports use; ``filters`` keeps the records that
belong to the population; ``canonical`` puts the population in the canonical form of the
selection algorithm and selects records from it; ``profile`` describes and reconciles the
population; ``strata`` suggests amount strata; ``stratified`` selects stratum by stratum.

Unlike the rest of the core, this package reads a file: the one given to it by path.
"""
