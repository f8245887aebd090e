"""Reading and writing: tables (CSV/TSV/XLSX/Parquet), Parquet datasets, result files, the demo data."""
