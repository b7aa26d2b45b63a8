"""Signal processing of GC-MS runs: peak detection, spectra, ladders found in a run (pure computation, no files)."""
