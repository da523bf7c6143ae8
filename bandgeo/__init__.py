"""bandgeo: days per year and length of day in deep time from 3-D scans of laminated stromatolites.

The pipeline, one module (or small sub-package) per stage, plain data objects in and out::

    scan (bandgeo.scan)            load_scan(path) -> Scan; prepare(scan, ...) -> Specimen
    curvature (bandgeo.features)   compute_features(specimen) -> CurvatureFeatures
    segmentation (bandgeo.segment) BandSegmenter().fit(specimen, features) -> .segmentation_
    review edits (bandgeo.review)  apply_review(segmentation, review) -> Segmentation
    measurement (bandgeo.measure)  measure_bands(specimen, segmentation) -> BandTable
    series (bandgeo.series)        build_series(band_table, ...) -> BandSeries
    periodicity (bandgeo.spectral) test_periodicity(series, ...) -> PeriodicityResult
    astronomy (bandgeo.astro)      rotation_from_days_per_year(...), earth_moon_distance(...)
    report (bandgeo.report)        write_report(folder)
    whole job (bandgeo.pipeline)   analyze(scan_path, out_dir, ...) -> AnalysisResult

The forward model of a growing laminated column is in ``bandgeo.synth``; batches, compilation and
power analysis in ``bandgeo.batch``. Heavy parts are imported only when used.
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
