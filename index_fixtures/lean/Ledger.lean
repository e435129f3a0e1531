import Ledger.Basic
import Ledger.Balance
import Ledger.Audit
