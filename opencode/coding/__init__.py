"""Code frames, assignments with undo, keyword rules and the machine coder.

API for the desk and other screens (each single-verbatim call is a few indexed queries, well under 20 ms):

    assignments.assign(study, verbatim_id, code_number, coder, source="hand", confidence=None) -> bool
    assignments.unassign(study, verbatim_id, code_number, coder) -> bool
    assignments.toggle(study, verbatim_id, code_number, coder) -> bool   # add / accept suggestion / remove
    assignments.accept(study, verbatim_id, code_number, coder) -> bool   # rule/machine -> hand
    assignments.reject(study, verbatim_id, code_number, coder) -> bool   # drop a suggestion
    assignments.question_suggestions(study, verbatim_id, coder, own_only=False) -> list[Suggestion]  # anyone's
    assignments.reject_suggestion(study, verbatim_id, code_number, coder) -> int  # for the question, undoable
    assignments.set_codes(study, verbatim_id, numbers, coder) -> bool    # exact hand set, one undo step
    assignments.codes_of(study, verbatim_id, coder, sources=None) -> list[AssignedCode]
    assignments.mark_done(study, verbatim_id, coder, done=True) / is_done(...)
    assignments.set_note(study, verbatim_id, coder, text) / note_of(...)
    assignments.code_counts(study, question, coder, sources=("hand",)) -> {number: verbatims}
    assignments.uncoded_ids(study, question, coder, after=None, limit=None, include_nonanswers=True)
    history.undo(study, coder) / history.redo(study, coder) -> action name or None
    history.next_undo(study, coder) / history.next_redo(...) -> ChangeSummary (action, verbatims, codes) or None
    frames.load_frame(study, question) -> Frame;  frames.get_code / add_code / edit_code / set_net /
        retire_code / renumber_code / merge_codes / delete_code / share_frame
    frame_io.import_frame / export_frame;  codebook.write_codebook
    import_codes.import_codes(study, question, columns, coder, source_path, ...)
    rules.parse_rule / rule_hits / apply_rules / set_rule
    machine_coding.train / load_model / suggest_one(study, verbatim_id) / suggest / apply_machine /
        learning_queue / second_look_queue / code_report / curve

The `final` coder holds adjudicated codes. Machine and rule codes are suggestions until a person accepts them.
"""
