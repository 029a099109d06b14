"""The face: the command line (``cli``), figures (``plot``), the HTML report (``report``), text
tables (``tables``) and the invented demo scenario (``demo``).

May import every layer below; nothing below imports it.
"""
