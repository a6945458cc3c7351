"""Statistics and the report, computed from export folders only.

Every module reads the contract tables (``exports.schema``) through
``analysis.exports_reader`` and may call pure functions of ``game_logic``;
nothing here touches the live server or its database.
"""
