#!/bin/bash
{{directives}}
# ratchet batch script, PBS backend: submitted with `qsub run.sh` from the task directory
# (qsub reads the directives above up to the first command).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
