"""Device models shared by the topologies: deck parameters as SI arrays over corners
(``params``), the MOS decap device (``mos``) and gate-oxide stress (``oxide_stress``).

Per-topology evaluation lives in ``celllab.topologies``; these modules know no topology.
No I/O.
"""
