"""Shipped benchmark networks and their original publications.

The benchmark files are the BIF versions distributed inside the pgmpy wheel
(``pgmpy/utils/example_models``, MIT licence), decompressed and unchanged.
The citations below were written from memory of the original publications
and of the network repository descriptions; they could not be checked
against the sources offline.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

from ...errors import UnknownNetworkError

__all__ = ["NetworkInfo", "CATALOG", "catalog_path"]

_HERE = os.path.dirname(os.path.abspath(__file__))


@dataclass(frozen=True)
class NetworkInfo:
    """Catalog entry of a shipped network."""

    name: str
    file: str
    domain: str
    description: str
    citation: str
    invented: bool = False
    #: True where answers could inform decisions about people's health or safety
    sensitive: bool = False


CATALOG: dict[str, NetworkInfo] = {
    info.name: info
    for info in [
        NetworkInfo(
            "cancer",
            "cancer.bif",
            "medicine (teaching example)",
            "Pollution and smoking as causes of lung cancer, with x-ray and dyspnoea findings; 5 variables.",
            "Korb, K. B. and Nicholson, A. E. (2010). Bayesian Artificial Intelligence, 2nd ed. "
            "Chapman & Hall/CRC, Boca Raton.",
            sensitive=True,
        ),
        NetworkInfo(
            "earthquake",
            "earthquake.bif",
            "home security (teaching example)",
            "Burglary and earthquake set off an alarm that two neighbours may report; 5 variables.",
            "Korb, K. B. and Nicholson, A. E. (2010). Bayesian Artificial Intelligence, 2nd ed. "
            "Chapman & Hall/CRC, Boca Raton.",
        ),
        NetworkInfo(
            "survey",
            "survey.bif",
            "transport survey (teaching example)",
            "Age and sex, education, occupation, residence and means of travel; 6 variables.",
            "Scutari, M. and Denis, J.-B. (2014). Bayesian Networks with Examples in R. "
            "Chapman & Hall/CRC, Boca Raton.",
        ),
        NetworkInfo(
            "sachs",
            "sachs.bif",
            "cell biology",
            "Protein-signalling network of human immune cells, discretised to three levels; 11 variables.",
            "Sachs, K., Perez, O., Pe'er, D., Lauffenburger, D. A. and Nolan, G. P. (2005). Causal "
            "protein-signaling networks derived from multiparameter single-cell data. Science, "
            "308(5721), 523-529.",
        ),
        NetworkInfo(
            "child",
            "child.bif",
            "medicine (diagnosis of congenital heart disease in newborns)",
            "Expert network for the telephone referral of 'blue babies'; 20 variables.",
            "Spiegelhalter, D. J., Dawid, A. P., Lauritzen, S. L. and Cowell, R. G. (1993). Bayesian "
            "analysis in expert systems. Statistical Science, 8(3), 219-247.",
            sensitive=True,
        ),
        NetworkInfo(
            "insurance",
            "insurance.bif",
            "car insurance risk",
            "Driver, car and claim-cost variables for evaluating car insurance risks; 27 variables.",
            "Binder, J., Koller, D., Russell, S. and Kanazawa, K. (1997). Adaptive probabilistic "
            "networks with hidden variables. Machine Learning, 29(2-3), 213-244.",
        ),
        NetworkInfo(
            "alarm",
            "alarm.bif",
            "medicine (patient monitoring in intensive care)",
            "The ALARM monitoring network for anaesthesia patients; 37 variables.",
            "Beinlich, I. A., Suermondt, H. J., Chavez, R. M. and Cooper, G. F. (1989). The ALARM "
            "monitoring system: a case study with two probabilistic inference techniques for belief "
            "networks. In Proceedings of the 2nd European Conference on Artificial Intelligence in "
            "Medicine, 247-256. Springer.",
            sensitive=True,
        ),
        NetworkInfo(
            "greenhouse",
            "greenhouse.bif",
            "demo (invented)",
            "An invented greenhouse: season drives both irrigation and yield, so the data confound "
            "the effect of irrigation; 6 variables. For demos only.",
            "Invented for intervgnn; not real data.",
            invented=True,
        ),
    ]
}


def catalog_path(name: str) -> str:
    """Path of a shipped network's BIF file."""
    if name not in CATALOG:
        raise UnknownNetworkError(
            f"unknown network '{name}'; shipped networks are: {', '.join(sorted(CATALOG))}"
        )
    return os.path.join(_HERE, CATALOG[name].file)
