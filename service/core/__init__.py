"""The numeric core of Foldwise: numpy and scipy only, vectorised, no web or storage.

Modules: ``folding`` (apparent frequency, zone, inversion), ``tones`` (labelled tone
arrays), ``filters`` (analog and digital responses), ``chain`` (acquisition chains),
``sources`` (machine descriptions to tones), ``prediction`` (tones through a chain),
``spectrum`` (windows, averaged spectra, floor and peaks), ``attribution`` (which peak
is an alias of what) and ``planning`` (choosing a sample rate and filter).
"""
