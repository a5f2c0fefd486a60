"""Session logic: attempts cut from the stream, judgement, drills, the session record.

* :mod:`livevowel.session.attempts` -- segmentation of frames into attempts, measures.
* :mod:`livevowel.session.judge` -- hit/miss, closeness and nearest target.
* :mod:`livevowel.session.drills` -- drill files and the trial-by-trial controller.
* :mod:`livevowel.session.store` -- SQLite record of speakers, sessions, attempts, clips.
* :mod:`livevowel.session.runner` -- :class:`DrillSession` (segment, judge, count, record)
  and a whole drill run without a screen.
* :mod:`livevowel.session.live` -- a drill on the practice screen (controller and pipeline adapter).
* :mod:`livevowel.session.free` -- free practice kept in the record (session and screen controller).
"""
