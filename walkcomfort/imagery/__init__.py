"""Camera frames on the CPU, and privacy tools for sharing sessions.

=================  ===========================================================================
``cues``           sky share, Excess Green greenery share, Green View pooling, brightness
``quality``        blur (variance of the Laplacian), over/under-exposure, lens obstruction
``people``         pedestrian count with OpenCV's HOG detector (Dalal & Triggs 2005)
``faces``          face (and plate) blurring with OpenCV's Haar cascades
``batch``          many frames: worker processes, progress bar, cache by file digest
``labels``         per-frame labels computed elsewhere (CSV), merged with the built-in cues
``attach``         cues onto the timeline, carried forward within a hold time
``sessions``       a session's frames table on the reference clock
``privacy``        keyed-hash pseudonyms, track-end trimming, TOML writing
``share``          the shareable copy of a session folder (``walkcomfort share``)
``commands``       the ``frames`` and ``share`` verbs
=================  ===========================================================================
"""
