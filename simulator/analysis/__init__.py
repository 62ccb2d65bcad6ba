"""Analysis of records: spectral estimation, likelihood fits, thermometry, feasibility."""
