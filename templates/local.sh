#!/usr/bin/env bash
# ratchet batch script, local backend. ratchet runs it as `bash run.sh`; you can run it the same way
# to reproduce the task by hand (move exit.json aside first: a task with an exit record never runs again).
