"""The investigation workspace: a Textual terminal UI over the scan engine.

Nothing heavy is imported here: ``investigator open`` must draw its first frame quickly, so the engine
(pandas, scikit-learn) is imported inside the workers that load and scan.
"""
