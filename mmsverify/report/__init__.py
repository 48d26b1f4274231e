"""Reports of studies: terminal text here; files and plots in submodules."""
