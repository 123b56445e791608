"""Perceptual and information-limit figures: pure numpy functions.

- :mod:`.threshold` — threshold in quiet (ISO 226:2003) and audiograms (ISO 389-7).
- :mod:`.masking` — masked threshold per frame and critical band
  (Schroeder, Atal & Hall 1979 spreading; Johnston 1988 offsets), NMR.
- :mod:`.sii` — Speech Intelligibility Index, ANSI S3.5-1997 one-third-octave procedure.
- :mod:`.wiener` — the non-causal Wiener bound and the error of a given filter.
"""
