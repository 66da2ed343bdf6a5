"""The design layer of tubewright, one sub-package per job (see docs/architecture.md):

nlp/        the Pyomo-to-cyipopt bridge (knows nothing of reactors)
design/     design spec, goals and limits, costs, collocation model, the design problem, alternatives
screening/  uncertain inputs, sampling, batched evaluation, analysis, re-optimisation, report
study/      study files, tasks, the results store, runners, status and HTML report
output/     plots, progress, JSON safety, cautions (presentation only)
verbs.py    one function per verb, called by the command line and by study tasks
cli.py      argument parsing and printing only
command.py  the installed `tubewright` command around cli.main (thread defaults, gc.freeze)
"""
