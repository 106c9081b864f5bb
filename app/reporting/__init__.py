"""Reporting: the record of a workshop.

``bundle`` builds, validates and restores the versioned record bundle;
``diagram_svg`` draws a diagram server-side in the canvas's visual language;
``report`` renders the self-contained HTML report from a bundle; ``charts``
draws the forest plot, the hidden-cause chart and the overlap histogram; ``cli``
adds the ``report`` and ``export`` commands.
"""
