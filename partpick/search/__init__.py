"""Standard-value search: the problem as the search sees it (:mod:`.problem`), every
configuration's best values chosen on numpy arrays (:mod:`.enumerate`, with its sorted
tables :mod:`.tables`, exact costs :mod:`.prices` and closed-form yield shares
:mod:`.estimate`), and what it proposes (:mod:`.candidates`)."""
