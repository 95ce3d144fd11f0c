"""Quality control of results (ISO/IEC 17025:2017 cl. 7.7, ensuring the validity of results).

Pure statistics, like ``server.engine``: plain numbers in, verdicts out, no database, web or file
code. Three checks a laboratory runs on its own results:
- ``precision``: two results of the same sample against the method's precision statement;
- ``control_chart``: a reference soil's results against limits drawn from its own history;
- ``proficiency``: the laboratory's result in an interlaboratory round as a z score.
"""
