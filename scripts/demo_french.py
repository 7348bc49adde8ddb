"""The French side of the demo atlas (invented, like the rest of it): translated notes of a few
objects, of every clade, of a few characters (label, state descriptions and note), of the about
page, and the French names of the places.

Used by make_demo.py; the English texts these translate are the notes that script writes (the
object notes come from the simulated traits, which are seeded, so they never change). The
acknowledgements page, most object notes and most characters stay untranslated on purpose: the
French pages show them in English, marked ``lang="en"``, and ``atlas check`` lists them.
"""

from __future__ import annotations

NBSP = "\u00a0"  # French puts a no-break space before ; : ? !

PLACE_NAMES = {
    "brunnick-cove": "Anse de Brunnick",
    "eskerlow": "Eskerlow",
    "hallivar": "Hallivar",
    "hrellun": "Hrellun",
    "nine-wicks": "Sanctuaire des Neuf Mèches",
    "orlowen": "Orlowen",
    "orrin-kell": "Orrin Kell",
    "ossem-haven": "Havre d’Ossem",
    "pennakin": "Pennakin",
    "vesmouth": "Vesmouth",
}

OBJECTS = {
    "lamp-03": (
        "Lampe 3 : lampe piriforme à rayons autour du trou de remplissage",
        "Lampe piriforme de taille moyenne, en argile chamois dégraissée au sable, tournée. Elle "
        "a un long bec spatulé et une anse en ruban ; le dessus porte des rayons autour du trou "
        "de remplissage, des rosettes estampées et un filet peint sur le bord, sous un engobe "
        "blanc. Les potiers de l’Anse de Brunnick extrayaient leur argile des falaises qui "
        "dominent l’anse.",
    ),
    "lamp-05": (
        "Lampe 5 : lampe piriforme à filet peint sur le bord",
        "Petite lampe piriforme en argile chamois dégraissée au sable, tournée. Elle a deux "
        "longs becs pincés et une anse annulaire ; le dessus porte un filet peint sur le bord, "
        "un motif de vagues et des pastilles d’argile appliquées, sous un engobe rouge. Les "
        "familles de Hallivar cuisaient leurs lampes dans des fours en fosse communs, sur le "
        "promontoire nord.",
    ),
    "lamp-07": (
        "Lampe 7 : lampe naviforme à bandeau incisé sur l’épaule",
        "Lampe naviforme de taille moyenne, en argile rouge dégraissée au sable, façonnée à la "
        "main. Elle a un long bec spatulé et une anse en ruban ; le dessus porte un bandeau "
        "incisé sur l’épaule, des rosettes estampées, un motif de vagues et des pastilles "
        "d’argile appliquées, sous un engobe rouge. Les ateliers de Vesmouth vendaient leurs "
        "lampes les jours de marché à des acheteurs venus de toutes les îles.",
    ),
    "stone-01": (
        "Lampe de pierre 1 : coupelle piriforme",
        "Coupelle ouverte piriforme de taille moyenne, taillée dans une pierre grise tendre, la "
        "mèche posée dans une encoche du bord. Elle n’a pas de bec mais une anse annulaire ; le "
        "dessus est orné de rayons autour du bassin et de pastilles d’argile appliquées. Les "
        "tailleurs de pierre de Hrellun façonnaient des lampes-coupelles ouvertes dans la "
        "pierre grise tendre de Caldrith.",
    ),
}

# Character id -> (label, state descriptions in symbol order, note): the characters with a
# drawing in the demo, and the size classes.
CHARACTERS = {
    "b01": (
        "Contour du corps en plan",
        ("rond", "piriforme", "naviforme"),
        "Relevé sur le réservoir vu de dessus, bec exclu. Un corps plus de 1,4 fois plus long "
        "que large, aux extrémités pointues, compte comme naviforme.",
    ),
    "b02": (
        "Classe de taille du corps",
        ("petit (moins de 8 cm)", "moyen (8 à 12 cm)", "grand (plus de 12 cm)"),
        "Mesurée selon le grand axe, bec compris. Les classes sont ordonnées : passer de petit "
        "à grand suppose de passer par moyen.",
    ),
    "d01": (
        "Rayons autour du trou de remplissage",
        ("absents", "présents"),
        "Lignes incisées ou imprimées qui rayonnent depuis le trou de remplissage ; on les "
        "compte à partir de trois.",
    ),
    "d05": (
        "Couleur de l’engobe",
        ("aucun engobe", "rouge", "blanc", "noir"),
        "La couleur d’un engobe qui couvre la plus grande partie de la surface, lue à la lumière "
        "du jour contre un nuancier.",
    ),
    "f05": (
        "Façonnage",
        ("à la main", "au tour"),
        "Les lampes tournées montrent des cannelures en spirale à l’intérieur du réservoir ; les "
        "lampes façonnées à la main montrent les jointures des colombins.",
    ),
    "h02": (
        "Type d’anse",
        ("annulaire", "tenon", "en ruban", "languette"),
        "Les anses annulaires et en ruban sont tirées d’une bande d’argile à part ; les tenons "
        "et les languettes sont pincés dans le corps.",
    ),
    "n03": (
        "Forme de l’extrémité du bec",
        ("arrondie", "spatulée", "pincée"),
        "Les extrémités pincées étaient serrées entre le pouce et l’index ; les extrémités "
        "spatulées s’élargissent au bout.",
    ),
}

CLADES = {
    "brunnick-potters": (
        "Potiers de l’Anse de Brunnick",
        "L’Anse de Brunnick et Eskerlow, sur Bruvanne, tirent leur argile des mêmes falaises "
        "et, à les en croire, descendent du même potier fondateur.",
    ),
    "hallivar-potters": (
        "Potiers de Hallivar",
        "Les potiers de Hallivar, au nord de Teskaray, cuisaient leurs lampes dans des fours en "
        "fosse communs. Les familles de l’Anse de Brunnick racontent que leurs grands-parents y "
        "ont appris à construire les fours.",
    ),
    "orlowen-coilers": (
        "Modeleurs au colombin d’Orlowen",
        "Les lampes montées au colombin d’Orlowen viennent de quelques familles apparentées ; "
        "leurs plus proches parentes sont les lampes de l’Anse de Brunnick, de l’autre côté de "
        "l’île.",
    ),
    "pennakin-family": (
        "Potiers de la famille Pennakin",
        "Une même famille élargie de Petite Ossem a fabriqué ces lampes pendant quatre "
        "générations. Leur pâte et leurs anses restent locales, même là où le décor ne l’est "
        "pas.",
    ),
    "teskaray-lamps": (
        "Les lampes de Teskaray",
        "Les deux lignées de Teskaray, les potiers de Hallivar et les ateliers de Vesmouth, "
        "descendent d’une tradition commune plus ancienne que la ville de marché.",
    ),
    "vesmouth-workshops": (
        "Ateliers du marché de Vesmouth",
        "Les ateliers du marché de Vesmouth vendaient à des acheteurs venus de toutes les îles. "
        "Une lampe de Pennakin imite de si près le bec et le dessus d’une lampe de Vesmouth que "
        "les arbres hésitent entre les deux lignées.",
    ),
}

ABOUT = """---
title: "À propos de cet atlas"
---

**Tout, dans cet atlas, est inventé pour la démonstration.** Les îles Quorvane, leurs îles
(Teskaray, Bruvanne, Petite Ossem et Caldrith), leurs villages, leurs communautés de potiers,
leurs lampes, les dates, les notes de terrain et les coordonnées n’existent pas. Les îles sont
placées en plein Atlantique Sud, là où il n’y a aucune terre, afin qu’aucun lieu réel ne soit
mal décrit.

L’atlas suit les lampes à huile en argile, tenues à la main, de cinq communautés de potiers
inventées, avec deux lampes de pierre taillée de l’île voisine de Caldrith comme groupe externe,
qui enracine l’arbre. Chaque lampe a été codée pour 44 caractères de son corps, de son bec, de
son anse, de son décor, de sa pâte et de sa cuisson.

## Comment les données de démonstration ont été produites

Un script (`scripts/make_demo.py`) a inventé une histoire vraie des lampes, y a fait évoluer
les caractères selon un modèle de Markov à temps continu, et a laissé une lampe de Pennakin
emprunter la moitié de ses caractères à une lampe de Vesmouth (le contact est déclaré dans les
données). Il a ensuite échantillonné 480 arbres dans la distribution a posteriori de la matrice
codée, à l’aide d’une petite MCMC de Metropolis-Hastings de sa propre facture, sous le modèle Mk
(Lewis 2001) avec une loi a priori exponentielle sur les longueurs de branches ; le premier
quart de l’échantillon est écarté comme période de chauffe (burn-in). Les dessins sont générés
à partir des traits codés de chaque lampe.

## Mises en garde

- Les emplacements exacts des découvertes attirent les pillards. L’emplacement du sanctuaire
  est généralisé à quelques kilomètres près, et un atlas réel devrait retenir ou généraliser
  tout site sensible.
- Certains objets font l’objet de restrictions fixées par leur communauté. Une lampe est ici
  réservée à la consultation par la communauté et une autre est restreinte ; une édition
  publique les laisse toutes deux de côté.
- Les niveaux d’accès de cet outil ne remplacent ni les protocoles communautaires ni le droit
  local du patrimoine. Décidez avec les communautés concernées de ce qui est publié, où et pour
  qui.
"""


def _typeset(text: str) -> str:
    """French spacing: a no-break space instead of the plain one before ; and :."""
    return text.replace(" ;", NBSP + ";").replace(" :", NBSP + ":")


def _quoted(text: str) -> str:
    return '"' + _typeset(text).replace("\\", "\\\\").replace('"', '\\"') + '"'


def note(title: str, body: str) -> str:
    """A translation note: front matter with the title, then the body."""
    return f"---\ntitle: {_quoted(title)}\n---\n\n{_typeset(body)}\n"


def character_note(label: str, states: tuple[str, ...], body: str) -> str:
    """A character's translation: front matter with the label and the state descriptions by
    symbol (the demo's symbols are 0, 1, 2, ...), then the note."""
    lines = [f"label: {_quoted(label)}", "states:"]
    lines += [f'  "{k}": {_quoted(text)}' for k, text in enumerate(states)]
    return "---\n" + "\n".join(lines) + f"\n---\n\n{_typeset(body)}\n"


def files() -> dict[str, str]:
    """Every French file of the demo, as relative path -> text."""
    out = {f"objects/{oid}.fr.md": note(*text) for oid, text in OBJECTS.items()}
    out.update({f"clades/{name}.fr.md": note(*text) for name, text in CLADES.items()})
    out.update({f"characters/{cid}.fr.md": character_note(*text)
                for cid, text in CHARACTERS.items()})
    out["pages/about.fr.md"] = _typeset(ABOUT)
    return out
