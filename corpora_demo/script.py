"""The authored demo calls: an invented island ferry line's booking and timetable desk.

Everything here is made up for the demo (the line, islands, harbour, ships, agents and
callers). Each sentence is written once, as a compact bracketed tree in the notation
described in ``corpora_demo.generate``; all files are derived from it.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Sent:
    """One sentence: its tree, an optional second reading, the repair of each EDITED node (None = restart)."""

    tree: str
    alt: str | None = None
    repairs: tuple[str | None, ...] = ()


@dataclass(frozen=True)
class Call:
    """One recorded call: a document with an agent (A) and a caller (C)."""

    doc: str
    title: str
    entities: dict[str, str]
    turns: list[tuple]
    wrap_trees: bool = False          # write its trees with the optional root wrapper "( (S ...) )"


# Invented names have no entry in the CMU dictionary; their pronunciations are ours
# (ARPAbet, hand-written), as are those of the partial words.
HAND_PRONUNCIATIONS = {
    "skerrin": "S K EH1 R IH0 N",
    "quillock": "K W IH1 L AH0 K",
    "varrish": "V AE1 R IH0 SH",
    "ellary": "EH1 L ER0 IY0",
    "maren": "M AA1 R AH0 N",
    "tobin": "T OW1 B IH0 N",
    "rell": "R EH1 L",
    "tamsin": "T AE1 M Z IH0 N",
    "abbing": "AE1 B IH0 NG",
    "thurs-": "TH ER1 Z",
}

# Pronoun and determiner features (UD), keyed by form; "you" and "it" get Case from their relation.
LEXICAL_FEATS = {
    "i": "Case=Nom|Number=Sing|Person=1|PronType=Prs",
    "me": "Case=Acc|Number=Sing|Person=1|PronType=Prs",
    "my": "Case=Gen|Number=Sing|Person=1|Poss=Yes|PronType=Prs",
    "we": "Case=Nom|Number=Plur|Person=1|PronType=Prs",
    "you": "Person=2|PronType=Prs",
    "your": "Person=2|Poss=Yes|PronType=Prs",
    "it": "Gender=Neut|Number=Sing|Person=3|PronType=Prs",
    "she": "Case=Nom|Gender=Fem|Number=Sing|Person=3|PronType=Prs",
    "her": "Case=Acc|Gender=Fem|Number=Sing|Person=3|PronType=Prs",
    "them": "Case=Acc|Number=Plur|Person=3|PronType=Prs",
    "the": "Definite=Def|PronType=Art",
    "a": "Definite=Ind|PronType=Art",
    "that": "Number=Sing|PronType=Dem",
    "this": "Number=Sing|PronType=Dem",
    "all": "PronType=Tot",
    "both": "PronType=Tot",
    "no": "PronType=Neg",
    "which": "PronType=Int",
    "what": "PronType=Int",
    "not": "Polarity=Neg",
    "n't": "Polarity=Neg",
}

# form TAG[:lemma] ... (first tag is the default; the source may force another with form/TAG)
LEXICON = """
, ,
. .
? .
'd MD:would
'll MD:will
'm VBP:be
're VBP:be
's VBZ:be
've VBP:have
n't RB:not
a DT
about IN
adults NNS:adult
afraid JJ
afternoon NN
all PDT
altogether RB
and CC
are VBP:be
at IN
back RB
bad JJ
be VB
better JJR:good
bike NN
bikes NNS:bike
bit NN
boat NN
boats NNS:boat
booking NN
both DT
bring VB
but CC
by IN
bye UH
brilliant JJ
can MD
car NN
card NN
care NN
certainly RB
change VB
charge NN
coming VBG:come
confirmation NN
could MD
day NN
dear NN
deck NN
do VBP VB
does VBZ:do
dog NN
dogs NNS:dog
down RP
drop VB
eight CD
eleven CD
email NN
else JJ
everything NN
ferry NN
fifteen CD
fine JJ
first JJ
for IN
four CD
free JJ
from IN
forecast NN
forty CD
full JJ
get VB
go VBP
good JJ
got VBN:get
great JJ
has VBZ:have
have VB
help VB
her PRP:she
hi UH
hello UH
how WRB
i PRP:I
in IN
instead RB
is VBZ:be
it PRP
keep VB
kept VBD:keep
last JJ
late JJ
leaves VBZ:leave
like VB
looking VBG:look
lounge NN
lovely JJ
many JJ
me PRP:I
mhm UH
morning NN
mother NN
move VB
moved VBN:move
moves VBZ:move
much RB
my PRP$
name NN
need VBP
new JJ
nine CD
no UH
now RB
of IN
off RP
oh UH
okay UH
on IN
one CD
onto IN
or CC
outside JJ
overnight RB
passengers NNS:passenger
pay VB
perfect JJ
phone NN
plenty NN
please UH
problem NN
put VBN:put
quiet JJ
quite RB
reference NN
refund VB
right UH
room NN
run VB
running VBG:run
safe JJ
same JJ
says VBZ:say
seat NN
seats NNS:seat
see VB
send VB
seven CD
she PRP
so RB
sorry JJ
space NN
speaking VBG:speak
still RB
stopped VBD:stop
sure JJ
take VB
text NN
than IN
thank VB
thanks NNS:thank
that DT
the DT
them PRP:they
then RB
there EX
this DT
thought VBD:think
through IN
ticket NN
tickets NNS:ticket
timetable NN
to TO
today NN
tomorrow NN
too RB
travels NNS:travel
trip NN
two CD
uh UH
um UH
very RB
want VB
was VBD:be
we PRP
weather NN
website NN
welcome JJ
what WP
which WDT
will MD
wind NN
window NN
winter NN
with IN
worries NNS:worry
would MD
year NN
yeah UH
yes UH
you PRP
your PRP$
"""

CALL01 = Call(
    doc="call01",
    title="Return trip to Quillock with a bike",
    entities={"line": "organization", "agent": "person", "caller": "person", "party": "person",
              "quillock": "place", "ellary": "place", "ticket": "object", "evening": "ship",
              "morning": "ship", "tickets": "object", "sat": "time"},
    turns=[
        ("A", "(FRAG (NP@line Skerrin/NNP Line/NNP) , (S (NP-SBJ Maren/NNP@agent) (VP speaking)) .)",
              "(SBARQ (WHADVP How) (SQ can (NP-SBJ I@agent) (VP help)) ?)"),
        ("C", Sent("(S (INTJ Hi) , (INTJ um) , (INTJ yeah) , (NP-SBJ I@caller) (VP 'd (VP like (S (VP to (VP book/VB"
                   " (NP@ticket (EDITED (DT a)) , a return/NN (PP to (NP Quillock/NNP@quillock)))))))) .)",
                   repairs=("a",))),
        ("A", "(FRAG (ADVP Certainly) .)",
              "(SQ Is (NP-SBJ that@ticket) (PP-PRD for (NP today)) ?)"),
        ("C", "(FRAG (INTJ No) , (INTJ um) , (NP@sat Saturday/NNP) .)",
              Sent("(S (EDITED (S (NP-SBJ We@party) (VP could (VP get (NP the))))) , (NP-SBJ we@party)"
                   " (VP 'd (VP like (NP@evening the evening/NN boat))) .)",
                   repairs=("we 'd like",))),
        ("A", "(FRAG (NP@evening the (QP six/CD forty) (PP from (NP@ellary Port/NNP Ellary/NNP))) , (INTJ yes) .)",
              "(FRAG (WHNP (WHADJP How many) passengers) ?)"),
        ("C", "(FRAG (NP (NP Two adults) and , (INTJ um) , (NP a bike)) .)"),
        ("A", "(INTJ Okay .)",
              "(S (NP-SBJ Bikes) (VP are (ADJP-PRD free) (PP-LOC on (NP@evening that boat))) .)"),
        ("C", "(FRAG (INTJ Oh) , (ADJP great) .)",
              "(SQ And (INTJ um) , can (NP-SBJ I@caller) (VP pay (PP by (NP card)) (PP on (NP the phone))) ?)"),
        ("A", "(S (INTJ Yes) , (NP-SBJ I@agent) (VP can (VP take (NP the card) (ADVP-TMP now))) .)",
              "(SQ Could (NP-SBJ I@agent) (VP have (NP (NP a name) (PP for (NP@ticket the booking)))) ?)"),
        ("C", "(S (NP-SBJ It) (VP 's (NP-PRD@caller (NP Rell/NNP) , (NP Tamsin/NNP Rell/NNP))) .)"),
        ("A", "(S (VP Thank (NP you@caller)) , (NP-VOC@caller Miss/NNP Rell/NNP) .)",
              "(S So (NP-SBJ that@ticket) (VP 's (NP-PRD (NP two adults) and (NP one bike))) .)"),
        ("C", "(INTJ Mhm .)"),
        ("A", "(SQ Are (NP-SBJ you@party) (VP coming (ADVP back) (NP-TMP the same day)) ?)"),
        ("C", Sent("(FRAG (INTJ No) , (PP (EDITED (IN on)) , (INTJ uh) , on (NP Monday/NNP morning/NN)) .)",
                   repairs=("on",))),
        ("A", "(S (NP-SBJ the morning/NN boats) (VP are (ADJP-PRD quite full)) .)",
              "(S (NP-SBJ There) (VP 's (NP!nsubj space) (PP on (NP@morning the (QP eight fifteen)))) .)"),
        ("C", "(S (NP-SBJ@morning the (QP eight fifteen)) (VP is (ADJP-PRD perfect)) .)"),
        ("A", "(FRAG (ADJP Lovely) .)",
              "(S (NP-SBJ That@ticket) (VP 's (NP-PRD forty pounds/NNS:pound) (ADVP altogether)) .)"),
        ("C", "(S (INTJ Oh) , (NP-SBJ that) (VP 's not/RB (ADJP-PRD bad)) {laugh} .)"),
        ("A", "(S (NP-SBJ I@agent) (VP 'll (VP send (NP@tickets the tickets) (PP to (NP your@caller email)))) .)",
              "(SQ Is (NP-SBJ there) (NP!nsubj anything/NN else) ?)"),
        ("C", "(S (INTJ No) , (NP-SBJ that) (VP 's (NP-PRD everything)) .)",
              "(FRAG (NP Thanks (ADVP very much)) .)"),
        ("A", "(S (NP-SBJ You@caller) (VP 're (ADJP-PRD welcome)) .)",
              "(INTJ Bye (ADVP now) .)"),
        ("C", "(INTJ Bye .)"),
    ],
)

CALL02 = Call(
    doc="call02",
    title="Sunday sailings to Varrish in winter",
    entities={"line": "organization", "agent": "person", "caller": "person", "timetable": "object",
              "ferry": "ship", "varrish": "place", "dog": "animal", "sunday": "ship"},
    turns=[
        ("A", "(S (NP!discourse Good morning) , (NP-SBJ you@caller) (VP 're (PP-PRD through"
              " (PP to (NP@line Skerrin/NNP Line/NNP)))) .)"),
        ("C", Sent("(S (INTJ Hello) , (INTJ um) , (EDITED (S (NP-SBJ I@caller) (VP 'm))) , (NP-SBJ I@caller)"
                   " (VP 'm (VP looking (PP-CLR at (NP@timetable (NP the winter timetable)"
                   " (PP on (NP your@line website)))))) .)",
                   alt="(S (INTJ Hello) , (INTJ um) , (EDITED (S (NP-SBJ I) (VP 'm))) , (NP-SBJ I)"
                       " (VP 'm (VP looking (PP-CLR at (NP the winter timetable))"
                       " (PP-LOC on (NP your website)))) .)",
                   repairs=("I 'm",))),
        ("A", "(INTJ Yes ?)"),
        ("C", Sent("(SQ (EDITED (SQ Does (NP the))) , (INTJ uh) , does (NP-SBJ@ferry (NP the ferry)"
                   " (PP to (NP Varrish/NNP@varrish))) (ADVP still) (VP run/VB (PP-TMP on (NP Sundays/NNPS:Sunday))) ?)",
                   repairs=("Does the",))),
        ("A", "(S (INTJ Yes) , (NP-SBJ it@ferry) (VP leaves (PP (PP at (NP ten/CD)) and (PP at (NP four)))) .)"),
        ("C", "(S (INTJ Oh) {laugh} , (NP-SBJ I@caller) (VP thought (SBAR (S (NP-SBJ it@ferry)"
              " (VP stopped (PP-TMP in (NP October/NNP)))))) .)"),
        ("A", "(S (NP-SBJ That) (VP was (NP-PRD last winter)) .)",
              "(S (NP-TMP This year) (NP-SBJ we@line) (VP kept (NP@sunday the Sunday/NNP boats)) .)"),
        ("C", "(INTJ Right .)",
              "(SQ And can (NP-SBJ I@caller) (VP take (NP@dog my@caller dog)) ?)"),
        ("A", "(S (NP-SBJ Dogs) (VP are (ADJP-PRD fine) (PP (PP on (NP the outside deck)) , but"
              " (PP not/RB in (NP the lounge)))) .)"),
        ("C", "(S (NP-SBJ She@dog) (VP 's (ADJP-PRD very quiet)) {laugh} .)"),
        ("A", "(S {laugh} (NP-SBJ I@agent) (VP 'm (ADJP-PRD sure)) .)",
              "(SQ Would (NP-SBJ you@caller) (VP like (S (VP to (VP book/VB (ADVP-TMP now))))) ?)"),
        ("C", "(FRAG (INTJ Yes) , (INTJ please) , (INTJ um) , (NP (ADVP just/RB) (NP me@caller) and (NP@dog the dog)) .)",
              "(FRAG (PP on (NP Sunday/NNP)) (PP at (NP ten/CD)) .)"),
        ("A", "(FRAG (ADJP Lovely) .)",
              "(SQ Could (NP-SBJ I@agent) (VP take (NP your@caller name)) ?)"),
        ("C", "(FRAG (NP@caller Abbing/NNP) .)",
              "(FRAG (NP@caller Ned/NNP Abbing/NNP) .)",
              "(FRAG {cough} (ADJP Sorry) .)"),
        ("A", "(FRAG (NP No/DT problem) , (NP-VOC@caller Mister/NNP Abbing/NNP) .)",
              "(S (NP-SBJ I@agent) (VP 've (VP put (NP you@caller) (PP-CLR on (NP@sunday the ten/CD o'clock/RB))"
              " (PP-TMP on (NP Sunday/NNP)))) .)"),
        ("C", "(S (VP Thank (NP you@agent)) , (NP-VOC@agent dear) .)"),
        ("A", "(S (VP Take (NP care)) .)",
              "(INTJ Bye bye .)"),
        ("C", "(INTJ Bye .)"),
    ],
)

CALL03 = Call(
    doc="call03",
    title="Moving a Tuesday booking to Friday",
    entities={"line": "organization", "agent": "person", "caller": "person", "booking": "object",
              "ref": "object", "mother": "person", "s915": "ship", "s1140": "ship", "seats": "object",
              "first": "ship", "tickets": "object"},
    wrap_trees=True,
    turns=[
        ("A", "(S (NP@line!dislocated Skerrin/NNP Line/NNP) , (NP-SBJ this) (VP is (NP-PRD Maren/NNP@agent)) .)"),
        ("C", "(INTJ Hi .)",
              "(S (S (NP-SBJ I@caller) (VP 've (VP got (NP@booking a booking (PP on (NP Tuesday/NNP)))))) , and"
              " (S (NP-SBJ I@caller) (VP need/VBP (S (VP to (VP move (NP it@booking)))))) .)"),
        ("A", "(FRAG (NP No/DT problem) .)",
              "(SBARQ (WHNP-1 What) (SQ 's (NP-SBJ@ref the booking reference) (NP-PRD *T*-1)) ?)"),
        ("C", "(S (NP-SBJ It@ref) (VP 's , (INTJ um) , (NP-PRD (QP eight one four two))) .)"),
        ("A", "(S (VP Thank (NP you@caller)) .)",
              "(SBARQ And (WHNP-1 which day) (SQ would (NP-SBJ you@caller) (VP like (NP *T*-1) (ADVP instead))) ?)"),
        ("C", Sent("(SQ Can (NP-SBJ I@caller) (VP change (NP it@booking) (EDITED (PP to (NP Thurs-))) , (INTJ um) ,"
                   " (PP to (NP Friday/NNP))) ?)",
                   repairs=("to Friday",))),
        ("A", "(S {breath} (S (NP-SBJ@s915 the (QP nine/CD fifteen)) (VP is (ADJP-PRD full))) ,"
              " (S (NP-SBJ I@agent) (VP 'm (ADJP-PRD afraid))) .)",
              "(S But (NP-SBJ there) (VP 's (NP!nsubj (NP a seat) (PP on (NP@s1140 the (QP eleven forty))))) .)"),
        ("C", Sent("(S (INTJ Um) , (EDITED (NP that@s1140)) , (NP-SBJ that@s1140) (VP 's (ADJP-PRD (NP a bit) late"
                   " (PP for (NP@mother my@caller mother)))) .)",
                   repairs=("that",)),
              "(S (NP-SBJ She@mother) (VP 's (VP travelling/VBG:travel (PP with (NP me@caller)))) .)"),
        ("A", "(S (NP-SBJ@first the first boat) (VP is (PP-PRD at (NP seven))) .)"),
        ("C", "(S (NP-SBJ@first Seven) (VP is (ADJP-PRD fine)) .)",
              Sent("(SQ Could (NP-SBJ you@agent) (VP keep (NP@seats (NP the seats) (PP by (NP the window)))"
                   " (PP for (NP her@mother))) ?)",
                   alt="(SQ Could (NP-SBJ you) (VP keep (NP (NP the seats) (PP by (NP the window))"
                       " (PP for (NP her)))) ?)")),
        ("A", "(S (INTJ Yes) , (NP-SBJ I@agent) (VP can (VP do/VB (NP that@seats))) .)",
              "(S (NP-SBJ I@agent) (VP 've (VP moved (NP@tickets both tickets) (PP to (NP (NP Friday/NNP)"
              " (PP at (NP seven)))))) .)"),
        ("C", "(FRAG (ADJP Brilliant) .)",
              "(S (VP Thank (NP you@agent) (ADVP so much)) {laugh} .)"),
        ("A", "(S (NP-SBJ You@caller) (VP 're (ADJP-PRD welcome)) .)",
              "(S (VP Have (NP a good trip)) .)"),
        ("C", "(INTJ Bye .)"),
        ("A", "(INTJ Bye (ADVP now) .)"),
    ],
)

CALL04 = Call(
    doc="call04",
    title="Afternoon boats to Varrish called off for wind",
    entities={"line": "organization", "agent": "person", "caller": "person", "party": "person",
              "tickets": "object", "four": "ship", "varrish": "place", "s915": "ship", "car": "object",
              "boats": "ship"},
    turns=[
        ("A", "(FRAG (NP@line Skerrin/NNP Line/NNP) , (S (NP-SBJ Tobin/NNP@agent) (VP speaking)) .)"),
        ("C", Sent("(S (INTJ Hi) , (NP-SBJ I@caller) (VP 've (VP got (NP@tickets tickets) (PP for (NP (EDITED (NP the)) ,"
                   " (INTJ uh) , (NP@four (NP the four o'clock/RB) (PP to (NP Varrish/NNP@varrish)))))"
                   " (NP-TMP today))) .)",
                   repairs=("the",)),
              "(SQ Is (NP-SBJ it@four) (ADVP still) (VP running (PP in (NP this wind))) ?)"),
        ("A", "(S (NP-SBJ I@agent) (VP 'm (ADJP-PRD afraid (SBAR (S (NP-SBJ@boats all!det:predet the afternoon boats)"
              " (VP are (PRT-PRD off)))))) .)"),
        ("C", "(INTJ Oh no/UH {laugh} .)",
              "(SBARQ So , (INTJ um) , (WHNP-1 what) (SQ do (NP-SBJ I@caller) (VP do/VB (NP *T*-1)"
              " (PP with (NP@tickets the tickets)))) ?)"),
        ("A", "(S (S (NP-SBJ You@caller) (VP can (VP move (NP them@tickets) (PP to (NP tomorrow))))) , or"
              " (S (NP-SBJ I@agent) (VP can (VP refund (NP them@tickets)))) .)"),
        ("C", "(S (NP-SBJ tomorrow morning) (VP would (VP be (ADJP-PRD better))) .)",
              "(SQ Will (NP-SBJ the weather) (VP be (ADJP-PRD better) (PP by (NP the morning))) ?)"),
        ("A", "(FRAG {cough} (ADJP Sorry) .)",
              "(S (NP-SBJ the forecast) (VP says (SBAR (S (NP-SBJ it) (VP 'll (VP drop (ADVP-TMP overnight)))))) .)"),
        ("C", "(FRAG (INTJ Okay) , (INTJ um) , (NP@s915 (NP the (QP nine/CD fifteen)) (NP-TMP tomorrow)) , (ADVP then) ?)"),
        ("A", "(S (INTJ Yes) , (NP-SBJ@s915 the (QP nine/CD fifteen)) (VP has (NP (NP plenty) (PP of (NP room)))) .)",
              "(S (NP-SBJ I@agent) (VP 'll (VP move (NP@tickets both tickets) (PP onto (NP that@s915)))) .)"),
        ("C", "(FRAG (NP Thanks) .)",
              Sent("(SQ (EDITED (S So (NP-SBJ we@party))) , can (NP-SBJ I@caller) (ADVP still) (VP bring"
                   " (NP@car the car)) ?)")),
        ("A", "(S (INTJ Yes) , (NP-SBJ the car ticket) (VP moves (ADVP too)) .)",
              "(S (NP-SBJ You@caller) (VP 'll (VP get (NP a new confirmation) (PP by (NP text)))) .)"),
        ("C", "(FRAG (ADJP Great) .)",
              "(S (VP Thank (NP you@agent)) , (NP-VOC Tobin/NNP@agent) .)"),
        ("A", "(FRAG (NP No/DT worries) .)",
              "(FRAG (NP safe travels) (NP-TMP tomorrow) .)"),
        ("C", "(INTJ Bye .)"),
        ("A", "(INTJ Bye (ADVP now) .)"),
    ],
)

CALLS: list[Call] = [CALL01, CALL02, CALL03, CALL04]
