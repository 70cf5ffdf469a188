"""The speed table of ``make bench`` (reported, never asserted).

``python -m bench`` measures these things and prints one Markdown table with medians, targets and
PASS/MISS, headed by the machine it ran on:

1. the whole report of a one-parameter loop of degree 8, 10, 20 and 40, and a straightforward
   sympy method at degree 8 and 10 (:mod:`bench.stable_range_row`);
2. diagram reduction at 10, 50 and 200 nodes and its log-log growth (:mod:`bench.reduction_row`);
3. pole paths over 2,000 parameter values and 5. the floating-point floor under them
   (:mod:`bench.pole_paths_row`);
4. the desktop program on a 30-node loop: edit to panels, slider frame, cold start, memory
   (:mod:`bench.app_row`);

and, as rows ``robust`` and ``plane``, the robust range (:mod:`bench.robust_row`) and the stability
plane of a degree-6 loop in two controller gains at 200 x 200 (:mod:`bench.plane_row`); as row
``delay``, the certified stable range and delay margin of a degree-6 loop with one dead time
(:mod:`bench.delay_row`).

Options: ``--quick`` (fewer repeats, shorter caps; about a minute), ``--json-out PATH`` (every
figure and raw time as JSON), ``--rows 1,2`` (only some rows). Inputs are invented and fixed
(:mod:`bench.generators`). The machine may be shared: the table shows the load at the start.
"""
