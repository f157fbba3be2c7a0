"""One screen per task: catalog, cell, what-if, ranking, decks; and the app's dialogs."""
